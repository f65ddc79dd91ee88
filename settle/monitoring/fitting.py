"""Back-analysis from monitoring: the volume loss and trough width factor K that the readings show.

Sign conventions (the project's): settlement positive downward [mm]; a residual is the reading minus the model
[mm]; volume loss in per cent of the excavated area [%]; chainage along the 3-D axis [m].

The model
    The same forward model as the assessment. For each distinct face position among a drive's readings, the drive is
    copied with `face_chainage_m` set to it (`dataclasses.replace`), `route.build_drive` and `route.tunnel_elements`
    cut its excavated length into elements, and `field.movements_at_points` gives the settlement at each reading's
    place and depth. A reading is attributed to the drive it names; the movements of other drives are not in its
    model (the readings must be referred to a base reading that leaves them out, or those drives be far away).

What is fitted (the scope)
    Per drive (default): one volume loss and one K for the whole drive; its reaches take the same values. The fit is
    keyed (drive name, None). Per reach (`per_reach=True`, for a drive with reaches): one volume loss and K for the
    drive outside its reaches, key (name, 0), and one for each reach, key (name, n) with n = 1, 2, ... in chainage
    order; they are fitted together, since a reading near a reach boundary sees both sides. A part of the drive is
    fitted only when at least `MIN_READINGS_SEEN` readings each get at least `SEEN_SHARE` of the part's full
    plane-strain Smax from it; a part the readings do not see keeps the project's values (and is reported). K is
    fitted as a drive (or reach) override of the layers' K, so i = K z0 along it.

Method
    1. Settlement is exactly linear in volume loss at fixed K: the model is S = S_fixed + sum_p VL_p U_p(K_p), with
       U_p the settlement of part p for 1 % volume loss and S_fixed that of the parts not fitted.
    2. Robust fit: `scipy.optimize.least_squares` over (VL_p, K_p), loss "soft_l1" with f_scale = `ROBUST_SCALE_MM`
       (residuals much larger than this weigh as their absolute value, not their square: our choice, about the
       scatter of levelled settlement points, common practice), bounds VL `VOLUME_LOSS_BOUNDS_PCT` and K
       `K_BOUNDS` (the project file's range of K). The start is the project's K and the linear solve for VL there.
       The Jacobian is d S/d VL = U_p exactly and d S/d K by a central difference (step `K_STEP`, relative).
    3. Outliers: robust sigma = 1.4826 x the median absolute deviation of the residuals (1.4826 = 1 / Phi^-1(0.75),
       which makes it a consistent estimate of the standard deviation for normal scatter), at least
       `SIGMA_FLOOR_MM`; a reading whose residual exceeds `outlier_limit` (default `OUTLIER_LIMIT` = 3) robust
       sigmas is an outlier, reported by point id and date. With normal scatter alone about 0.3 % of readings lie
       beyond 3 sigma, so a few small "outliers" among many readings are expected.
    4. Final fit: ordinary least squares over the readings that are not outliers, from the robust solution. The
       volume loss, K, `readings_used` and `rms_mm` are those of this fit. A value at a bound gets no standard error
       (NaN) and a warning: the readings do not hold it.
    5. Element cuts depend slightly on K (the plan tolerance is a share of i), so steps 2-4 run on the cuts of the
       current K with i = K z0 updated in each element, and the cuts are rebuilt at the solution until they no
       longer change. `rms_mm` and the fitted settlements come from the forward model built afresh at the fitted
       values, at the project's precision: a re-run of the fitted project file gives the same numbers (to the six
       significant digits the file holds).

Uncertainty (readings clustered by monitoring point)
    Readings of one point taken on many days are not independent: an error that stays with the point (its datum,
    its bedding, ground the model does not hold there) is in every one of them. The textbook standard errors
    sqrt(diag((J^T J)^-1 s^2)), s^2 = sum r^2 / (n - p), count each reading as new information; with a persistent
    offset per point they come out several times too small (about 2.2 times on the synthetic monitoring of
    tests/test_fit_uncertainty.py). They are kept, for comparison only, as `*_se_independent`.
    The standard errors (`*_se`) are cluster-robust instead (`cluster_robust_covariance`): the sandwich
    (J^T J)^-1 (sum_g J_g^T u_g u_g^T J_g) (J^T J)^-1 over the G monitoring points g among the readings used, with
    J the Jacobian of the final fit at the solution, J_g its rows for point g and u_g that point's residuals
    adjusted for its leverage (CR2: u_g = (I - J_g (J^T J)^-1 J_g^T)^(-1/2) r_g). CR2 rather than CR1 (u_g = r_g,
    times G/(G-1) (n-1)/(n-p)) because in a monitoring layout a few points (those near the centre line, passed by
    the face) carry most of the information, which is where CR1 runs low; on the synthetic monitoring of
    tests/test_fit_uncertainty.py CR2 covered the truth about 1 percentage point more often than CR1. Either allows
    any correlation among the readings of a point and any scatter from point to point, and assumes the points
    independent of each other (a datum error shared by a whole array is not covered).
    The 95 % interval of each value (`*_ci95`, [low, high]) is value -/+ t(0.975, G-1) x standard error, Student's
    t with G-1 degrees of freedom; it is not cut at the bounds of the value's range. With fewer than `FEW_POINTS`
    points a warning says the standard errors are themselves uncertain; with one point there are none.
    The sandwich, not a bootstrap that refits with points resampled: it costs one matrix product, where a bootstrap
    costs a few hundred full fits (each as long as the fit itself). The outliers left out are taken as known; the
    interval does not allow for that choice.

Readings ahead of the face
    By default all readings are kept with equal weight. A reading's pull on the estimate is its sensitivity
    d S/d(VL, K), which the model makes small ahead of the face (the longitudinal cumulative-normal profile: half of
    Smax above the face, under 3 % of it 2 i ahead), so readings ahead of the face inform the fit little and those
    far behind it most. Movements the model does not hold (heave from face or lubricant pressure ahead of the face,
    consolidation long after the face has passed) show as residuals; gross ones as outliers.
    Field records do not always follow the model near the face: with closed-face machines the settlement above the
    face is often 0.2 to 0.4 Smax rather than 0.5 (from memory), and in Hong Kong pipejacking it developed 3 to 4 z0
    behind the face (methods.md section 2, second-hand). Where that shows, `min_face_past_m` fits only the readings
    taken with the face at least that far past the point (along the drive, the point projected square onto the
    axis in plan); the others are left out of the fit, counted in a warning, and still get a fitted value.

References
----------
Jones, B. D. & Clayton, C. R. I. (2013). Guidelines for Gaussian curve-fitting to settlement data. World Tunnel
    Congress 2013, Geneva (report the parameter uncertainty, not only the best fit; methods.md section 8).
scipy.optimize.least_squares documentation: the "trf" bounded trust-region method, the "soft_l1" loss
    rho(z) = 2 ((1 + z)^0.5 - 1) with z = (r / f_scale)^2, and the Jacobian at the solution (methods.md section 8
    cites the scipy curve_fit pages for the same machinery).
Cameron, A. C. & Miller, D. L. (2015). A practitioner's guide to cluster-robust inference. J. Human Resources
    50(2), 317-372: the cluster-robust sandwich for least squares and nonlinear least squares, the CR1 factor
    G/(G-1) (N-1)/(N-K), and, with few clusters, Wald intervals from T(G-1) (pages and sections from memory).
Rousseeuw, P. J. & Croux, C. (1993). Alternatives to the median absolute deviation. J. Am. Stat. Assoc. 88(424),
    1273-1283 (the scaled MAD as a robust sigma; citation from memory; the factor is computed, see step 3).
"""
from __future__ import annotations

import json
import math
from dataclasses import asdict, dataclass, field, replace

import numpy as np
from scipy.optimize import least_squares
from scipy.special import ndtri, stdtrit

from ..engine.elements import Elements, tunnel_elements
from ..engine.field import movements_at_points
from ..errors import InputError
from ..inputs.ground import GroundModel
from ..inputs.model import Drive, Project
from ..inputs.project_file import K_RANGE
from ..inputs.readings import Readings
from ..inputs.route import DriveResult, build_drive

#: soft_l1 loss scale of the robust fit: residuals much larger weigh linearly (our choice, common practice). [mm]
ROBUST_SCALE_MM = 1.0
#: A reading further than this many robust sigmas from the robust fit is an outlier. [-]
OUTLIER_LIMIT = 3.0
#: Robust sigma = MAD_TO_SIGMA x median absolute deviation; 1 / Phi^-1(0.75) = 1.4826 (normal scatter). [-]
MAD_TO_SIGMA = float(1.0 / ndtri(0.75))
#: The robust sigma is never taken below this, the resolution of precise levelling (common practice). [mm]
SIGMA_FLOOR_MM = 0.05
#: Bounds of the fitted volume loss: more than 0 (the project file needs it) up to the project file's maximum. [%]
VOLUME_LOSS_BOUNDS_PCT = (0.001, 20.0)
#: Bounds of the fitted K: the project file's range of trough_width_k. [-]
K_BOUNDS = (K_RANGE["ge"], K_RANGE["le"])
#: Relative step of the central difference in K. [-]
K_STEP = 1e-3
#: Contributions below this are not evaluated during the fit: small, so the model is smooth in K. [m]
FIT_PRECISION_M = 1e-9
#: A part of the drive is fitted when at least MIN_READINGS_SEEN readings get SEEN_SHARE of its Smax from it.
SEEN_SHARE = 0.25
MIN_READINGS_SEEN = 3
#: Rebuilds of the element cuts at the solution, at most.
MAX_ROUNDS = 4
#: Two-sided level of the interval of each fitted value (the `*_ci95` fields). [-]
CI_LEVEL = 0.95
#: Below this many monitoring points a warning says the cluster-robust standard errors are themselves uncertain
#: (our choice; Cameron & Miller 2015 give no sharp number of clusters that is enough, from memory). [-]
FEW_POINTS = 10
#: Trigger status of a reading against the user's trigger levels (|settlement| compared, heave included).
STATUS_CLEAR, STATUS_AMBER, STATUS_RED = "clear", "amber reached", "red reached"


@dataclass(frozen=True)
class FitResult:
    """Back-analysed values for one drive or one part of it (see the module docstring for the key)."""

    volume_loss_pct: float  # [%]
    trough_width_k: float  # [-]
    volume_loss_pct_se: float  # standard error, cluster-robust by monitoring point [%]; NaN when not defined
    trough_width_k_se: float  # standard error, cluster-robust by monitoring point [-]; NaN when not defined
    readings_used: int  # readings in the final fit (outliers and points below the crown left out)
    rms_mm: float  # root mean square of the residuals of the readings used [mm]
    outliers: list = field(default_factory=list)  # dicts: point_id, date, line, reading_mm, fitted_mm,
    #                                               residual_mm, standardised_residual
    volume_loss_pct_ci95: list = field(default_factory=lambda: [math.nan, math.nan])  # 95 % interval [low, high] [%]
    trough_width_k_ci95: list = field(default_factory=lambda: [math.nan, math.nan])  # 95 % interval [low, high] [-]
    points_used: int = 0  # monitoring points among the readings used: the clusters G of the standard errors
    volume_loss_pct_se_independent: float = math.nan  # standard error were the readings independent [%]; comparison
    trough_width_k_se_independent: float = math.nan  # standard error were the readings independent [-]; comparison


@dataclass
class BackAnalysis:
    """What `back_analysis` returns: the fits, per reading what the fit made of it, and warnings for the user."""

    fits: dict  # (drive name, None | reach number) -> FitResult
    fitted_mm: np.ndarray  # settlement of the fitted model at each reading; NaN where its drive was not fitted
    in_fit: np.ndarray  # bool, the reading is one of the readings used
    outlier: np.ndarray  # bool
    warnings: list[str]
    outlier_limit: float = OUTLIER_LIMIT  # [robust sigmas]
    min_face_past_m: float | None = None  # [m]; None = all readings fitted


# ------------------------------------------------------------------------------------------------- the model
def drive_with_values(drive: Drive, values: dict) -> Drive:
    """A copy of `drive` with volume loss and K set: `values` maps None (the whole drive, reaches too), 0 (the drive
    outside its reaches) or n >= 1 (its n-th reach in chainage order) to (volume_loss_pct, trough_width_k)."""
    if None in values:
        vl, k = values[None]
        reaches = tuple(replace(r, volume_loss_pct=vl, trough_width_k=k) for r in drive.reaches)
        return replace(drive, volume_loss_pct=vl, trough_width_k=k, reaches=reaches)
    out = drive
    if 0 in values:
        out = replace(out, volume_loss_pct=values[0][0], trough_width_k=values[0][1])
    reaches = tuple(replace(r, volume_loss_pct=values[n][0], trough_width_k=values[n][1]) if n in values else r
                    for n, r in enumerate(drive.reaches, 1))
    return replace(out, reaches=reaches)


def apply_fits(project: Project, fits: dict) -> Project:
    """The project with the fitted volume loss and K written into its drives (as `fitted_project_toml` does)."""
    drives = []
    for drive in project.drives:
        values = {key[1]: (f.volume_loss_pct, f.trough_width_k) for key, f in fits.items() if key[0] == drive.name}
        drives.append(drive_with_values(drive, values) if values else drive)
    return replace(project, drives=tuple(drives))


def _check_drives(project: Project, readings: Readings) -> None:
    names = tuple(d.name for d in project.drives)
    if names != readings.drive_names:
        raise InputError(f"{readings.source}: the readings were read against drives {readings.drive_names}, but the "
                         f"project has {names}; read them again against this project")


def predicted_settlement_mm(project: Project, readings: Readings, ground: GroundModel | None = None) -> np.ndarray:
    """Settlement of the project's model at each reading's place and depth, with the face where the reading gives it.

    Each reading sees only the drive it names. NaN for a point at or below the crown of an element that reaches it.
    `ground` may pass the project's GroundModel already built (it depends on the ground only). [mm, positive downward]
    """
    _check_drives(project, readings)
    ground = ground or GroundModel(project.ground)
    label = project.path.name if project.path else "project"
    precision = project.output.precision_mm / 1e3
    out = np.full(len(readings), np.nan)
    for d, drive in enumerate(project.drives):
        idx = np.flatnonzero(readings.drive == d)
        faces, inverse = np.unique(readings.face_chainage_m[idx], return_inverse=True)
        for j, face in enumerate(faces):
            rows = idx[inverse == j]
            at_face = replace(drive, face_chainage_m=float(face))
            geometry, _ = build_drive(at_face, ground, label)
            elements = tunnel_elements(at_face, geometry, ground, d)
            out[rows] = movements_at_points(elements, ground, readings.x_m[rows], readings.y_m[rows],
                                            readings.depth_m[rows], precision).settlement_mm
    return out


def point_chainage_m(geometry: DriveResult, x, y) -> np.ndarray:
    """Chainage of the foot of the perpendicular from each place to the drive's axis in plan (the nearest point of
    the plan polyline; places beyond an end take the end's chainage). [m]"""
    x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    a, b = geometry.axis_xyz_m[:-1, :2], geometry.axis_xyz_m[1:, :2]
    ca, cb = geometry.chainage_m[:-1], geometry.chainage_m[1:]
    places, inverse = np.unique(np.column_stack([x, y]), axis=0, return_inverse=True)
    out = np.empty(len(places))
    for start in range(0, len(places), 256):
        p = places[start:start + 256, None, :]
        seg = b - a
        t = np.clip(((p - a) * seg).sum(axis=2) / (seg * seg).sum(axis=1), 0.0, 1.0)
        gap = np.hypot(*(a + t[..., None] * seg - p).transpose(2, 0, 1))
        k = np.argmin(gap, axis=1)
        rows = np.arange(len(k))
        out[start:start + 256] = ca[k] + t[rows, k] * (cb[k] - ca[k])
    return out[inverse.ravel()]


def _part_of(drive: Drive, keys: list, chainage_m: np.ndarray) -> np.ndarray:
    """Index into `keys` of the part of the drive each chainage lies in (as `route` assigns reach values)."""
    part = np.zeros(len(chainage_m), dtype=int)
    if keys != [None]:
        for n, reach in enumerate(drive.reaches, 1):
            part[(chainage_m >= reach.from_chainage_m) & (chainage_m < reach.to_chainage_m)] = n
    return part


def _nominal_volume_losses(drive: Drive, n_parts: int) -> list:
    """A volume loss per part, each distinct and none the drive's or a reach's own, so that the element cuts fall
    at every part boundary. [%]"""
    fixed = {drive.volume_loss_pct} | {r.volume_loss_pct for r in drive.reaches}
    nominal = []
    candidate = 1.0
    for _ in range(n_parts):
        while candidate in fixed or candidate in nominal:
            candidate += 0.125
        nominal.append(candidate)
        candidate += 0.125
    return nominal


class _DriveModel:
    """The forward model of one drive at its readings, split into the parts fitted, with the element cuts of a
    reference K kept while K varies (the cuts are rebuilt by `build`)."""

    def __init__(self, project: Project, ground: GroundModel, d: int, readings: Readings, idx: np.ndarray,
                 keys: list):
        self.drive = project.drives[d]
        self.d, self.ground, self.keys = d, ground, keys
        self.x, self.y, self.depth = readings.x_m[idx], readings.y_m[idx], readings.depth_m[idx]
        faces, inverse = np.unique(readings.face_chainage_m[idx], return_inverse=True)
        self.faces = [float(f) for f in faces]
        self.rows = [np.flatnonzero(inverse == j) for j in range(len(faces))]
        label = project.path.name if project.path else "project"
        self.geometry = [build_drive(replace(self.drive, face_chainage_m=f), ground, label)[0] for f in self.faces]
        self.fitted = np.ones(len(keys), dtype=bool)
        self.nominal = _nominal_volume_losses(self.drive, len(keys))
        self.k_ref = None
        self.pieces = []
        self.cuts = None
        self._columns = {}

    def project_k(self) -> np.ndarray:
        """K of each part in the project (the layers' thickness-weighted K where no override), for a start."""
        face = max(range(len(self.faces)), key=lambda j: self.faces[j])
        at_face = replace(self.drive, face_chainage_m=self.faces[face])
        el = tunnel_elements(at_face, self.geometry[face], self.ground, self.d)
        part = _part_of(self.drive, self.keys, 0.5 * (el.chainage_from_m + el.chainage_to_m))
        overall = float(np.median(el.trough_width_k)) if len(el) else 0.5
        k = [float(np.median(el.trough_width_k[part == p])) if np.any(part == p) else overall
             for p in range(len(self.keys))]
        return np.clip(k, *K_BOUNDS)

    @property
    def parts(self) -> np.ndarray:
        """Indices (into keys) of the parts fitted."""
        return np.flatnonzero(self.fitted)

    def build(self, k: np.ndarray) -> bool:
        """Cut the elements with the parts fitted at K = k (one per part fitted, 1 % volume loss each); True when
        the cuts changed."""
        values = {self.keys[p]: (self.nominal[p], float(k[j])) for j, p in enumerate(self.parts)}
        model = drive_with_values(self.drive, values)
        pieces, cuts = [], []
        for face, geometry in zip(self.faces, self.geometry):
            el = tunnel_elements(replace(model, face_chainage_m=face), geometry, self.ground, self.d)
            part = _part_of(self.drive, self.keys, 0.5 * (el.chainage_from_m + el.chainage_to_m))
            units = {}
            for p in self.parts:
                sub = el.take(part == p)
                sub.volume_per_m = sub.volume_per_m / self.nominal[p]  # per 1 % volume loss
                units[p] = sub
            pieces.append((units, el.take(~self.fitted[part])))
            cuts.append(el.chainage_from_m)
        changed = self.cuts is None or any(a.shape != b.shape or np.any(a != b) for a, b in zip(cuts, self.cuts))
        self.k_ref, self.pieces, self.cuts = np.array(k, dtype=float), pieces, cuts
        self._columns = {}
        return changed

    def _evaluate(self, elements: Elements, rows: np.ndarray) -> np.ndarray:
        return movements_at_points(elements, self.ground, self.x[rows], self.y[rows], self.depth[rows],
                                   FIT_PRECISION_M).settlement_mm

    def column(self, p: int, k: float) -> np.ndarray:
        """Settlement of part p for 1 % volume loss at K = k, at every reading (cuts of the last build). [mm]"""
        key = (p, float(k))
        if key not in self._columns:
            out = np.zeros(len(self.x))
            for (units, _), rows in zip(self.pieces, self.rows):
                el = units[p]
                if len(el):
                    el = replace(el, trough_width_k=np.full(len(el), float(k)), trough_width_m=el.axis_depth_m * k)
                    out[rows] = self._evaluate(el, rows)
            self._columns[key] = out
        return self._columns[key]

    def unit(self, k: np.ndarray) -> np.ndarray:
        """(n readings, n parts fitted) settlements for 1 % volume loss at K = k (one per part fitted). [mm]"""
        return np.column_stack([self.column(p, k[j]) for j, p in enumerate(self.parts)])

    def fixed(self) -> np.ndarray:
        """Settlement of the parts not fitted, at the project's values. [mm]"""
        out = np.zeros(len(self.x))
        for (_, el), rows in zip(self.pieces, self.rows):
            if len(el):
                out[rows] = self._evaluate(el, rows)
        return out

    def full_smax_mm(self) -> np.ndarray:
        """Median plane-strain Smax of each fitted part's elements for 1 % volume loss, at the largest face (NaN for
        a part not excavated there). [mm]"""
        units = self.pieces[int(np.argmax(self.faces))][0]
        return np.array([float(np.median(units[p].max_settlement_m)) * 1e3 if len(units[p]) else np.nan
                         for p in self.parts])


# --------------------------------------------------------------------------------------------- the fitting
def _robust_sigma(residual: np.ndarray) -> float:
    """MAD_TO_SIGMA x median absolute deviation, not below SIGMA_FLOOR_MM. [mm]"""
    mad = float(np.median(np.abs(residual - np.median(residual))))
    return max(MAD_TO_SIGMA * mad, SIGMA_FLOOR_MM)


def _solve(model: _DriveModel, observed: np.ndarray, active: np.ndarray, p0: np.ndarray, outlier_limit: float):
    """Steps 2 to 4 of the method on the current cuts: (parameters, outlier mask, robust sigma, Jacobian)."""
    parts = model.parts
    m = len(parts)
    fixed = model.fixed()

    def residual(p, rows):
        return model.unit(p[m:])[rows] @ p[:m] + fixed[rows] - observed[rows]

    def jacobian(p, rows):
        vl, k = p[:m], p[m:]
        cols = [model.unit(k)[rows]]
        deriv = np.empty((int(rows.sum()), m))
        for j, part in enumerate(parts):
            h = K_STEP * k[j]
            deriv[:, j] = vl[j] * (model.column(part, k[j] + h) - model.column(part, k[j] - h))[rows] / (2.0 * h)
        return np.column_stack(cols + [deriv])

    lower = [VOLUME_LOSS_BOUNDS_PCT[0]] * m + [K_BOUNDS[0]] * m
    upper = [VOLUME_LOSS_BOUNDS_PCT[1]] * m + [K_BOUNDS[1]] * m
    p0 = np.clip(p0, lower, upper)
    robust = least_squares(residual, p0, jac=jacobian, bounds=(lower, upper), loss="soft_l1",
                           f_scale=ROBUST_SCALE_MM, x_scale="jac", args=(active,))
    r = np.zeros(len(observed))
    r[active] = -residual(robust.x, active)
    sigma = _robust_sigma(r[active])
    outlier = active & (np.abs(r) > outlier_limit * sigma)
    inlier = active & ~outlier
    final = least_squares(residual, robust.x, jac=jacobian, bounds=(lower, upper), loss="linear",
                          x_scale="jac", args=(inlier,))
    return final.x, outlier, sigma, jacobian(final.x, inlier), final.active_mask


def _start(model: _DriveModel, observed: np.ndarray, active: np.ndarray, k0: np.ndarray) -> np.ndarray:
    """Start values: K of the project and the linear least-squares volume loss there."""
    u = model.unit(k0)[active]
    vl, *_ = np.linalg.lstsq(u, observed[active] - model.fixed()[active], rcond=None)
    return np.concatenate([np.clip(vl, *VOLUME_LOSS_BOUNDS_PCT), k0])


def _describe(drive: Drive, key) -> str:
    if key is None:
        return f"drive {json.dumps(drive.name)}"
    if key == 0:
        return f"drive {json.dumps(drive.name)} outside its reaches"
    r = drive.reaches[key - 1]
    return f"drive {json.dumps(drive.name)} reach {key} ({r.from_chainage_m:g} to {r.to_chainage_m:g} m)"


def _mark_parts_seen(model: _DriveModel, k0: np.ndarray, warnings: list) -> bool:
    """Mark the parts of the drive that enough readings see as fitted, warn of the others; False when none is."""
    with np.errstate(invalid="ignore"):
        seen = (model.unit(k0) >= SEEN_SHARE * model.full_smax_mm()[None, :]).sum(axis=0)
    model.fitted = seen >= MIN_READINGS_SEEN
    for p in np.flatnonzero(~model.fitted):
        warnings.append(f"{_describe(model.drive, model.keys[p])}: not fitted, {int(seen[p])} reading(s) see it (at "
                        f"least {MIN_READINGS_SEEN} must get {SEEN_SHARE:.0%} of its Smax); the project's values kept")
    return bool(model.fitted.any())


def _readings_used(model: _DriveModel, readings: Readings, idx: np.ndarray, k0: np.ndarray,
                   min_face_past_m: float | None, warnings: list) -> np.ndarray:
    """Which of the drive's readings the fit uses: not below a crown, and (with `min_face_past_m` [m]) taken with
    the face far enough past the point; warns of those left out."""
    drive = model.drive
    widest = model.unit(np.full(len(k0), K_BOUNDS[1]))
    deep = np.isnan(widest).any(axis=1) | np.isnan(model.fixed()) | np.isnan(model.unit(k0)).any(axis=1)
    active = ~deep
    if min_face_past_m is not None:
        past = readings.face_chainage_m[idx] - point_chainage_m(model.geometry[0], model.x, model.y)
        near = ~deep & (past < min_face_past_m)
        active &= ~near
        if near.any():
            warnings.append(f"drive {json.dumps(drive.name)}: {int(near.sum())} reading(s) taken with the face "
                            f"less than {min_face_past_m:g} m past the point left out of the fit "
                            "(min_face_past_m)")
    if deep.any():
        ids = sorted(set(readings.point_id[idx][deep]))
        warnings.append(f"drive {json.dumps(drive.name)}: {int(deep.sum())} reading(s) at points at or below the "
                        f"crown left out (no subsurface trough there): {', '.join(ids[:10])}"
                        + (" ..." if len(ids) > 10 else ""))
    return active


def _solve_in_rounds(model: _DriveModel, observed: np.ndarray, active: np.ndarray, k0: np.ndarray,
                     outlier_limit: float):
    """Robust fit, outliers and final fit, with the element cuts rebuilt at the solution until they stay: as
    `_solve`, (parameters, outlier mask, robust sigma [mm], Jacobian, bound mask)."""
    m = len(k0)
    p = _start(model, observed, active, k0)
    for _ in range(MAX_ROUNDS):
        p, out, sigma, jac, at_bound = _solve(model, observed, active, p, outlier_limit)
        if not model.build(p[m:]):
            break
    return p, out, sigma, jac, at_bound


def _settlement_at_fit(project: Project, ground: GroundModel, readings: Readings, idx: np.ndarray, drive: Drive,
                       values: dict) -> np.ndarray:
    """Settlement at the drive's readings of the forward model built afresh with the fitted values. [mm]"""
    at_fit = replace(project, drives=tuple(drive_with_values(dr, values) if dr is drive else dr
                                           for dr in project.drives))
    return predicted_settlement_mm(at_fit, readings.subset(idx), ground)


def independent_covariance(jacobian, residual) -> np.ndarray:
    """Covariance of least-squares parameters were the residuals independent with one variance:
    (J^T J)^-1 s^2 with s^2 = sum r^2 / (n - p).

    Parameters
    ----------
    jacobian : array_like (n, p)  d(model)/d(parameters) at the solution, one row per reading. [mm / unit]
    residual : array_like (n,)    Reading minus model at the solution. [mm]

    Returns
    -------
    ndarray (p, p)  Covariance of the parameters. [unit^2]

    References
    ----------
    Cameron & Miller (2015), J. Human Resources 50(2): the default (non-robust) variance their cluster-robust one is
    set against (section II, from memory).
    """
    jac, r = np.asarray(jacobian, dtype=float), np.asarray(residual, dtype=float)
    n, p = jac.shape
    return np.linalg.inv(jac.T @ jac) * float(r @ r) / (n - p)


def cluster_robust_covariance(jacobian, residual, cluster, kind: str = "CR2") -> np.ndarray:
    """Cluster-robust covariance of least-squares parameters: readings of one cluster (monitoring point) may be
    correlated in any way, clusters are independent of each other.

    V = B M B with B = (J^T J)^-1 and M = sum_g (J_g^T u_g)(J_g^T u_g)^T over the G clusters, J_g and r_g the rows
    of the Jacobian and the residuals of cluster g, and
      CR1: u_g = r_g, and V multiplied by c = G/(G-1) (n-1)/(n-p);
      CR2: u_g = (I - H_gg)^(-1/2) r_g with H_gg = J_g B J_g^T (the symmetric square root of the generalised inverse),
           which removes the bias of M when the errors are independent with one variance; smaller bias than CR1 with
           few or unequal clusters.
    For a nonlinear fit J is the Jacobian at the solution, in place of the regressors of a linear one.

    Parameters
    ----------
    jacobian : array_like (n, p)  d(model)/d(parameters) at the solution, one row per reading. [mm / unit]
    residual : array_like (n,)    Reading minus model at the solution. [mm]
    cluster : array_like (n,)     The cluster of each reading (any labels: point ids). At least 2 clusters.
    kind : str                    "CR2" (default) or "CR1".

    Returns
    -------
    ndarray (p, p)  Covariance of the parameters. [unit^2]

    References
    ----------
    Cameron, A. C. & Miller, D. L. (2015). A practitioner's guide to cluster-robust inference. J. Human Resources
    50(2): the cluster-robust variance of least squares and of nonlinear least squares, the CR1 factor c, and CR2
    among the bias corrections for few clusters (sections II, VI and VII, from memory).
    Bell, R. M. & McCaffrey, D. F. (2002). Bias reduction in standard errors for linear regression with multi-stage
    samples. Survey Methodology 28(2), 169-181 (CR2; citation from memory).
    """
    if kind not in ("CR1", "CR2"):
        raise ValueError(f"kind must be 'CR1' or 'CR2'; got {kind!r}")
    jac, r = np.asarray(jacobian, dtype=float), np.asarray(residual, dtype=float)
    n, p = jac.shape
    _, g = np.unique(np.asarray(cluster), return_inverse=True)
    g = g.ravel()
    n_clusters = int(g.max()) + 1 if n else 0
    if n_clusters < 2:
        raise ValueError(f"cluster-robust covariance needs at least 2 clusters; got {n_clusters}")
    bread = np.linalg.inv(jac.T @ jac)
    u = r.copy()
    if kind == "CR2":
        for rows in np.split(np.argsort(g, kind="stable"), np.cumsum(np.bincount(g))[:-1]):
            jg = jac[rows]
            w, v = np.linalg.eigh(np.eye(len(rows)) - jg @ bread @ jg.T)
            root = np.where(w > 1e-10, 1.0 / np.sqrt(np.clip(w, 1e-10, None)), 0.0)
            u[rows] = v @ (root * (v.T @ r[rows]))
    scores = np.zeros((n_clusters, p))
    np.add.at(scores, g, jac * u[:, None])
    c = n_clusters / (n_clusters - 1) * (n - 1) / (n - p) if kind == "CR1" else 1.0
    return c * bread @ (scores.T @ scores) @ bread


def t_interval(value, standard_error, dof, level: float = CI_LEVEL) -> np.ndarray:
    """Two-sided interval value -/+ t((1 + level)/2, dof) x standard error, Student's t.

    Parameters
    ----------
    value, standard_error : array_like  Estimates and their standard errors. [unit]
    dof : float                         Degrees of freedom: G - 1 for a cluster-robust standard error of G clusters.
    level : float                       Coverage of the interval, 0 < level < 1. [-]

    Returns
    -------
    ndarray (..., 2)  [low, high]. [unit]

    References
    ----------
    Cameron & Miller (2015), J. Human Resources 50(2): with few clusters, Wald intervals with critical values of
    T(G-1) rather than the normal (section VI, from memory).
    """
    half = stdtrit(float(dof), 0.5 * (1.0 + level)) * np.asarray(standard_error, dtype=float)
    value = np.asarray(value, dtype=float)
    return np.stack([value - half, value + half], axis=-1)


def _standard_errors(drive: Drive, residual: np.ndarray, jac: np.ndarray, point_id: np.ndarray, n_par: int,
                     warnings: list):
    """Standard errors of the fitted values from the Jacobian and the residuals [mm] of the readings used, clustered
    by `point_id`, and were the readings independent: (cluster-robust, independent, number of points). NaN, with a
    warning, where the readings cannot give them."""
    robust, independent = np.full(n_par, math.nan), np.full(n_par, math.nan)
    n_used, n_points = len(residual), len(set(point_id))
    name = json.dumps(drive.name)
    if n_used <= n_par:
        warnings.append(f"drive {name}: {n_used} reading(s) for {n_par} values; no standard errors")
    elif np.linalg.cond(jac.T @ jac) >= 1e12:
        warnings.append(f"drive {name}: the readings cannot tell volume loss and K apart (their Jacobian is "
                        "singular); no standard errors")
    else:
        independent = np.sqrt(np.diag(independent_covariance(jac, residual)))
        if n_points >= 2:
            robust = np.sqrt(np.diag(cluster_robust_covariance(jac, residual, point_id)))
        if n_points < FEW_POINTS:
            warnings.append(f"drive {name}: the readings used come from {n_points} monitoring point(s), fewer than "
                            f"{FEW_POINTS}: " + ("no standard errors (they need readings of 2 points at least)"
                                                 if n_points < 2 else
                                                 f"the standard errors, clustered by point, are themselves uncertain; "
                                                 f"the {CI_LEVEL:.0%} intervals use Student's t with "
                                                 f"{n_points - 1} degree(s) of freedom"))
    return robust, independent, n_points


def _outlier_records(readings: Readings, idx: np.ndarray, observed: np.ndarray, exact: np.ndarray,
                     residual: np.ndarray, sigma: float, out: np.ndarray) -> list:
    """One dict per outlier of the drive: point, date, line, reading, fitted value and residual [mm]."""
    return [{
        "point_id": str(readings.point_id[idx][r]), "date": str(readings.date[idx][r]),
        "line": int(readings.line[idx][r]), "reading_mm": float(observed[r]), "fitted_mm": float(exact[r]),
        "residual_mm": float(residual[r]), "standardised_residual": float(residual[r] / sigma),
    } for r in np.flatnonzero(out)]


def _part_fits(model: _DriveModel, p: np.ndarray, se: tuple, n_used: int, rms: float, outliers: list,
               warnings: list) -> dict:
    """The FitResult of each part fitted, keyed (drive name, part key); warns of a value at a bound of its range."""
    drive, keys, m = model.drive, model.keys, len(model.parts)
    robust, independent, n_points = se
    ci = t_interval(p, robust, max(n_points - 1, 1))
    fits = {}
    for j, q in enumerate(model.parts):
        for value, (lo, hi), name in ((p[j], VOLUME_LOSS_BOUNDS_PCT, "volume_loss_pct"),
                                      (p[m + j], K_BOUNDS, "trough_width_k")):
            if value <= lo * (1 + 1e-9) or value >= hi * (1 - 1e-9):
                warnings.append(f"{_describe(drive, keys[q])}: fitted {name} = {value:g} is at the bound of "
                                f"its range ({lo:g} to {hi:g}); the readings do not hold it")
        fits[(drive.name, keys[q])] = FitResult(
            volume_loss_pct=float(p[j]), trough_width_k=float(p[m + j]), volume_loss_pct_se=float(robust[j]),
            trough_width_k_se=float(robust[m + j]), readings_used=n_used, rms_mm=rms, outliers=outliers,
            volume_loss_pct_ci95=[float(v) for v in ci[j]], trough_width_k_ci95=[float(v) for v in ci[m + j]],
            points_used=n_points, volume_loss_pct_se_independent=float(independent[j]),
            trough_width_k_se_independent=float(independent[m + j]))
    return fits


def _fit_drive(project: Project, ground: GroundModel, readings: Readings, d: int, idx: np.ndarray, per_reach: bool,
               outlier_limit: float, min_face_past_m: float | None, warnings: list):
    """Fit drive d to its readings `idx`: (fits, inlier mask, outlier mask, fitted settlement [mm]) of its
    readings, or None when it cannot be fitted."""
    drive = project.drives[d]
    keys = [None] if not (per_reach and drive.reaches) else list(range(len(drive.reaches) + 1))
    model = _DriveModel(project, ground, d, readings, idx, keys)
    observed = readings.settlement_mm[idx]
    k0 = model.project_k()
    model.build(k0)
    if not _mark_parts_seen(model, k0, warnings):
        return None
    k0 = k0[model.fitted]
    m = len(k0)
    model.build(k0)
    active = _readings_used(model, readings, idx, k0, min_face_past_m, warnings)
    if active.sum() <= 2 * m:
        warnings.append(f"drive {json.dumps(drive.name)}: not fitted, {int(active.sum())} usable reading(s) for "
                        f"{2 * m} values")
        return None
    p, out, sigma, jac, at_bound = _solve_in_rounds(model, observed, active, k0, outlier_limit)
    inlier = active & ~out

    values = {keys[q]: (float(p[j]), float(p[m + j])) for j, q in enumerate(model.parts)}
    exact = _settlement_at_fit(project, ground, readings, idx, drive, values)
    residual = observed - exact
    n_used, n_par = int(inlier.sum()), 2 * m
    rms = float(np.sqrt(np.mean(residual[inlier] ** 2))) if n_used else math.nan
    robust, independent, n_points = _standard_errors(drive, residual[inlier], jac,
                                                     readings.point_id[idx][inlier], n_par, warnings)
    robust[at_bound != 0] = independent[at_bound != 0] = math.nan
    se = (robust, independent, n_points)
    outliers = _outlier_records(readings, idx, observed, exact, residual, sigma, out)
    return _part_fits(model, p, se, n_used, rms, outliers, warnings), inlier, out, exact


def _fitted_per_reading(readings: Readings, fitted_values: dict) -> np.ndarray:
    """Settlement of the fitted model at every reading, from each fitted drive's values; NaN elsewhere. [mm]"""
    fitted_mm = np.full(len(readings), np.nan)
    for d, values in fitted_values.items():
        fitted_mm[readings.drive == d] = values
    return fitted_mm


def back_analysis(project: Project, readings: Readings, per_reach: bool = False,
                  outlier_limit: float = OUTLIER_LIMIT, min_face_past_m: float | None = None) -> BackAnalysis:
    """Fit volume loss and K to monitoring readings, per drive (or per reach), robustly (see the module docstring).

    Parameters
    ----------
    project : Project        The project whose forward model is fitted (drives, ground, precision).
    readings : Readings      From `settle.readings.read_readings` against this project.
    per_reach : bool         Fit the reaches of a drive separately (drives without reaches are fitted whole).
    outlier_limit : float    Outlier threshold in robust sigmas. [-]
    min_face_past_m : float  Fit only readings taken with the face at least this far past the point; None = all
                             readings (see "Readings ahead of the face"). [m]

    Returns
    -------
    BackAnalysis  Fits keyed (drive name, None | part number), the fitted settlement per reading, warnings.

    Raises
    ------
    InputError  When no drive can be fitted (no reading sees the excavation).
    """
    if not outlier_limit > 0:
        raise ValueError(f"outlier_limit must be more than 0; got {outlier_limit}")
    if min_face_past_m is not None and not math.isfinite(min_face_past_m):
        raise ValueError(f"min_face_past_m must be a finite number of metres or None; got {min_face_past_m}")
    _check_drives(project, readings)
    ground = GroundModel(project.ground)
    fits, warnings = {}, []
    in_fit = np.zeros(len(readings), dtype=bool)
    outlier = np.zeros(len(readings), dtype=bool)
    fitted_values = {}
    for d in range(len(project.drives)):
        idx = np.flatnonzero(readings.drive == d)
        if not len(idx):
            continue
        drive_fit = _fit_drive(project, ground, readings, d, idx, per_reach, outlier_limit, min_face_past_m, warnings)
        if drive_fit is None:
            continue
        drive_fits, in_fit[idx], outlier[idx], fitted_values[d] = drive_fit
        fits.update(drive_fits)
    if not fits:
        raise InputError(f"{readings.source}: no drive could be fitted: no part of any drive is seen by at least "
                         f"{MIN_READINGS_SEEN} readings")
    return BackAnalysis(fits=fits, fitted_mm=_fitted_per_reading(readings, fitted_values), in_fit=in_fit,
                        outlier=outlier, warnings=warnings, outlier_limit=outlier_limit,
                        min_face_past_m=min_face_past_m)


# --------------------------------------------------------------------------------------- comparison, report
@dataclass
class Comparison:
    """Each monitored point's latest reading against the prediction (arrays of one length, one per point)."""

    point_id: np.ndarray  # str objects
    drive: np.ndarray  # drive name (str objects) the reading is attributed to
    x_m: np.ndarray
    y_m: np.ndarray
    depth_m: np.ndarray
    date: np.ndarray  # datetime64[s] UTC of the latest reading
    face_chainage_m: np.ndarray  # face of the drive at that reading
    reading_mm: np.ndarray  # positive downward
    predicted_mm: np.ndarray  # the project's model at that face
    difference_mm: np.ndarray  # reading - predicted
    fitted_mm: np.ndarray  # the fitted model at that face; NaN without fits
    trigger_status: np.ndarray  # STATUS_CLEAR | STATUS_AMBER | STATUS_RED (str objects)


def trigger_status(reading_mm, amber_mm: float, red_mm: float) -> np.ndarray:
    """Status of readings against trigger levels, on the size of the movement (settlement or heave).

    Parameters
    ----------
    reading_mm : array_like  Settlement readings, positive downward. [mm]
    amber_mm, red_mm : float Trigger levels, 0 < amber < red. [mm]

    Returns
    -------
    ndarray of str  STATUS_RED where |reading| >= red, else STATUS_AMBER where |reading| >= amber, else STATUS_CLEAR.
    """
    if not (isinstance(amber_mm, (int, float)) and math.isfinite(amber_mm) and amber_mm > 0):
        raise InputError(f"[monitoring] amber_mm must be a number more than 0 mm; got {amber_mm!r}")
    if not (isinstance(red_mm, (int, float)) and math.isfinite(red_mm) and red_mm > amber_mm):
        raise InputError(f"[monitoring] red_mm must be a number more than amber_mm ({amber_mm:g} mm); got {red_mm!r}")
    size = np.abs(np.asarray(reading_mm, dtype=float))
    return np.where(size >= red_mm, STATUS_RED, np.where(size >= amber_mm, STATUS_AMBER, STATUS_CLEAR)).astype(object)


def comparison(project: Project, readings: Readings, amber_mm: float, red_mm: float,
               fits: dict | None = None) -> Comparison:
    """Each point's latest reading, the project's prediction at that reading's face, the difference, the fitted
    model's value (when `fits` are given) and the trigger status of the reading."""
    status = trigger_status(readings.settlement_mm, amber_mm, red_mm)  # checks the levels first
    order = np.lexsort((readings.date, readings.point_id.astype(str)))
    ids = readings.point_id[order].astype(str)
    last = order[np.append(ids[1:] != ids[:-1], True)]
    latest = readings.subset(last)
    ground = GroundModel(project.ground)
    predicted = predicted_settlement_mm(project, latest, ground)
    fitted = predicted_settlement_mm(apply_fits(project, fits), latest, ground) if fits else \
        np.full(len(latest), np.nan)
    return Comparison(
        point_id=latest.point_id, drive=np.array([latest.drive_names[d] for d in latest.drive], dtype=object),
        x_m=latest.x_m, y_m=latest.y_m, depth_m=latest.depth_m, date=latest.date,
        face_chainage_m=latest.face_chainage_m, reading_mm=latest.settlement_mm, predicted_mm=predicted,
        difference_mm=latest.settlement_mm - predicted, fitted_mm=fitted, trigger_status=status[last])


def _plain(value):
    """JSON-ready: NaN and infinities become None."""
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_plain(v) for v in value]
    return value


def fit_report(project: Project, readings: Readings, analysis: BackAnalysis) -> dict:
    """The content of fit.json: the readings used and left out, each fit with its part of the drive, warnings and
    the method's settings. NaN is written as null."""
    by_name = {d.name: d for d in project.drives}
    fits = []
    for (name, key), fit in analysis.fits.items():
        drive = by_name[name]
        if key is None or key == 0:
            span = {"from_chainage_m": None, "to_chainage_m": None}
        else:
            r = drive.reaches[key - 1]
            span = {"from_chainage_m": r.from_chainage_m, "to_chainage_m": r.to_chainage_m}
        part = "whole drive" if key is None else "outside the reaches" if key == 0 else f"reach {key}"
        fits.append({"drive": name, "part": part, **span, **asdict(fit)})
    return _plain({
        "readings": {"file": readings.source, "kept": len(readings), "used": int(analysis.in_fit.sum()),
                     "outliers": int(analysis.outlier.sum()), "rows_left_out": readings.left_out_count,
                     "left_out": readings.left_out_messages()},
        "fits": fits,
        "warnings": list(analysis.warnings),
        "method": {"robust_loss": "soft_l1", "robust_scale_mm": ROBUST_SCALE_MM,
                   "outlier_limit_sigma": analysis.outlier_limit, "min_face_past_m": analysis.min_face_past_m,
                   "sigma": "1.4826 x median absolute deviation of the robust residuals",
                   "sigma_floor_mm": SIGMA_FLOOR_MM, "final_fit": "least squares without the outliers",
                   "standard_errors": "cluster-robust (CR2 sandwich), readings clustered by monitoring point",
                   "interval": f"{CI_LEVEL:.0%} two-sided, Student's t with points_used - 1 degrees of freedom"},
    })
