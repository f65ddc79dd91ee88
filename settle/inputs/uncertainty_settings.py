"""Uncertain inputs of a probabilistic run: the distributions of volume loss and trough width factor of each drive,
and the `[uncertainty]` settings of the sampling, with their readers and checks.

Keys (units in the names: _pct per cent; K is dimensionless)

[drives.volume_loss_distribution]   optional, per [[drives]] item: the drive's volume loss as a random variable. The
                        drive's `volume_loss_pct` stays its design value; every sample scales it, and the volume
                        loss of each of its [[drives.reaches]], by the same ratio r = VL_sample / volume_loss_pct.
    kind                "lognormal" | "triangular" | "uniform", required.
    lognormal:          median_pct  more than 0 and at most 20: the median volume loss [%];
                        cov         more than 0 and at most 2: the coefficient of variation, sd / mean [-].
                        Unbounded above (a sample may exceed 20 % when cov is large).
    triangular:         min_pct, mode_pct, max_pct [%]: 0 <= min_pct <= mode_pct <= max_pct <= 20, min_pct < max_pct.
    uniform:            min_pct, max_pct [%]: 0 <= min_pct < max_pct <= 20.
[drives.trough_width_distribution]  optional, per [[drives]] item: the trough width factor K (i = K z0) as a random
                        variable. Every sample scales each trough width of the drive by q = K_sample / K_design, with
                        K_design the drive's `trough_width_k` when given, else the median of this distribution.
    kind                "normal" | "uniform", required.
    normal:             mean  from 0.1 to 1.5; sd  more than 0 and at most 1.4 (the width of 0.1..1.5). The normal is
                        truncated to 0.1..1.5, the range the loader allows for K.
    uniform:            min, max  from 0.1 to 1.5, min < max.
[uncertainty]           optional, with at least one distribution in the project.
    samples             whole number from MIN_SAMPLES (32) to MAX_SAMPLES (100 000), default 1000: Monte Carlo samples.
    seed                whole number from 0 to 2**63 - 1, default 0: the same seed gives the same samples.
    drives_correlated   true | false, default false: true = every drive draws the same uniforms (a high volume loss
                        on one drive goes with a high one on every drive); false = drives independent.

The bounds on cov, sd and samples are our choice (no published source): beyond them a median or a mean stops
describing the input, and more samples add run time for a Monte Carlo error already below 0.2 percentage points.

A width of zero (min = max) is refused: a fixed value is the deterministic run. A very narrow distribution gives the
deterministic categories back (tests/test_probability.py).

References
----------
Lognormal with median m and coefficient of variation c: ln X ~ N(ln m, s^2), s^2 = ln(1 + c^2) (standard properties of
the lognormal distribution; from memory). Inverse CDFs from scipy.stats (lognorm, triang, uniform, truncnorm).
"""
from __future__ import annotations

import difflib
import math
from dataclasses import dataclass

import numpy as np
from scipy import stats

from ..errors import InputError
from .tables import bounds_text, shown

#: Range of the trough width factor K allowed anywhere in a project (as the loader's K_RANGE). [-]
K_MIN, K_MAX = 0.1, 1.5
#: Largest volume loss of a drive (as the loader's VOLUME_LOSS_RANGE). [%]
VOLUME_LOSS_MAX_PCT = 20.0
#: Largest coefficient of variation of a lognormal volume loss (our choice). [-]
MAX_COV = 2.0
#: Largest standard deviation of a normal K: the width of K_MIN..K_MAX (our choice). [-]
MAX_K_SD = K_MAX - K_MIN
#: Bounds and default of [uncertainty] samples (our choice). [-]
MIN_SAMPLES, MAX_SAMPLES, DEFAULT_SAMPLES = 32, 100_000, 1000
MAX_SEED = 2**63 - 1

VOLUME_LOSS_KINDS = {"lognormal": ("median_pct", "cov"), "triangular": ("min_pct", "mode_pct", "max_pct"),
                     "uniform": ("min_pct", "max_pct")}
TROUGH_WIDTH_KINDS = {"normal": ("mean", "sd"), "uniform": ("min", "max")}
#: The keys a [[drives]] item takes for its distributions (for the loader's list of drive keys).
DRIVE_DISTRIBUTION_KEYS = ("volume_loss_distribution", "trough_width_distribution")
UNCERTAINTY_KEYS = ("samples", "seed", "drives_correlated")


# ------------------------------------------------------------------------------------------------- the dataclasses
@dataclass(frozen=True)
class VolumeLossDistribution:
    """The volume loss of a drive as a random variable: `kind` and the parameters it uses (None for the others). [%]"""

    kind: str  # a key of VOLUME_LOSS_KINDS
    median_pct: float | None = None
    cov: float | None = None  # [-]
    min_pct: float | None = None
    mode_pct: float | None = None
    max_pct: float | None = None

    def frozen(self):
        """The scipy.stats frozen distribution of the volume loss. [%]"""
        if self.kind == "lognormal":
            return stats.lognorm(s=math.sqrt(math.log1p(self.cov**2)), scale=self.median_pct)
        if self.kind == "triangular":
            width = self.max_pct - self.min_pct
            return stats.triang(c=(self.mode_pct - self.min_pct) / width, loc=self.min_pct, scale=width)
        return stats.uniform(loc=self.min_pct, scale=self.max_pct - self.min_pct)

    def ppf(self, u) -> np.ndarray:
        """Inverse CDF: the volume loss at the probabilities `u` (array_like in [0, 1]). [%]"""
        return np.asarray(self.frozen().ppf(np.asarray(u, dtype=float)), dtype=float)

    def median(self) -> float:
        """The median volume loss. [%]"""
        return float(self.ppf(0.5))

    def describe(self) -> str:
        """One line for reports, e.g. "lognormal, median 1 %, cov 0.3"."""
        if self.kind == "lognormal":
            return f"lognormal, median {self.median_pct:g} %, cov {self.cov:g}"
        if self.kind == "triangular":
            return f"triangular, {self.min_pct:g} / {self.mode_pct:g} / {self.max_pct:g} % (min / mode / max)"
        return f"uniform, {self.min_pct:g} to {self.max_pct:g} %"


@dataclass(frozen=True)
class TroughWidthDistribution:
    """The trough width factor K of a drive as a random variable, within K_MIN..K_MAX. [-]"""

    kind: str  # a key of TROUGH_WIDTH_KINDS
    mean: float | None = None
    sd: float | None = None
    min: float | None = None
    max: float | None = None

    def frozen(self):
        """The scipy.stats frozen distribution of K (the normal truncated to K_MIN..K_MAX). [-]"""
        if self.kind == "normal":
            return stats.truncnorm(a=(K_MIN - self.mean) / self.sd, b=(K_MAX - self.mean) / self.sd, loc=self.mean,
                                   scale=self.sd)
        return stats.uniform(loc=self.min, scale=self.max - self.min)

    def ppf(self, u) -> np.ndarray:
        """Inverse CDF: K at the probabilities `u` (array_like in [0, 1]), within K_MIN..K_MAX. [-]"""
        return np.clip(np.asarray(self.frozen().ppf(np.asarray(u, dtype=float)), dtype=float), K_MIN, K_MAX)

    def median(self) -> float:
        """The median K. [-]"""
        return float(self.ppf(0.5))

    def describe(self) -> str:
        if self.kind == "normal":
            return f"normal, mean {self.mean:g}, sd {self.sd:g}, truncated to {K_MIN:g}-{K_MAX:g}"
        return f"uniform, {self.min:g} to {self.max:g}"


@dataclass(frozen=True)
class DriveUncertainty:
    """The distributions of one drive (by name); None where that input is fixed at its design value."""

    drive: str
    volume_loss: VolumeLossDistribution | None = None
    trough_width: TroughWidthDistribution | None = None


@dataclass(frozen=True)
class UncertaintySettings:
    """The `[uncertainty]` table: how many samples, from which seed, and whether the drives share their uniforms."""

    samples: int = DEFAULT_SAMPLES
    seed: int = 0
    drives_correlated: bool = False


@dataclass(frozen=True)
class ProjectUncertainty:
    """Everything a probabilistic run needs from the project file: the settings and the drives' distributions (only
    drives with at least one distribution are listed)."""

    settings: UncertaintySettings
    drives: tuple[DriveUncertainty, ...]

    def for_drive(self, name: str) -> DriveUncertainty:
        """The distributions of drive `name` (both None when it has none)."""
        for item in self.drives:
            if item.drive == name:
                return item
        return DriveUncertainty(name)


# ------------------------------------------------------------------------------------------------------ readers
def read_volume_loss_distribution(table, where: str) -> VolumeLossDistribution:
    """A `[drives.volume_loss_distribution]` table, checked.

    Parameters
    ----------
    table : dict  The TOML table.
    where : str   How messages name it, e.g. 'ostrey.toml [[drives]] #1 [drives.volume_loss_distribution]'.

    Raises
    ------
    InputError  One line naming `where`, the key, the rule and the value given.
    """
    kind = _kind(table, VOLUME_LOSS_KINDS, where)
    if kind == "lognormal":
        median = _number(table, "median_pct", where, gt=0.0)
        median = _number(table, "median_pct", where, le=VOLUME_LOSS_MAX_PCT, why="the largest volume loss of a drive")
        return VolumeLossDistribution(kind, median_pct=median, cov=_number(table, "cov", where, gt=0.0, le=MAX_COV))
    low = _number(table, "min_pct", where, ge=0.0, lt=VOLUME_LOSS_MAX_PCT)
    high = _number(table, "max_pct", where, le=VOLUME_LOSS_MAX_PCT, why="the largest volume loss of a drive")
    _above(high, low, "max_pct", "min_pct", " %", where)
    if kind == "uniform":
        return VolumeLossDistribution(kind, min_pct=low, max_pct=high)
    mode = _number(table, "mode_pct", where, ge=low, le=high, why="min_pct to max_pct")
    return VolumeLossDistribution(kind, min_pct=low, mode_pct=mode, max_pct=high)


def read_trough_width_distribution(table, where: str) -> TroughWidthDistribution:
    """A `[drives.trough_width_distribution]` table, checked (as `read_volume_loss_distribution`)."""
    kind = _kind(table, TROUGH_WIDTH_KINDS, where)
    if kind == "normal":
        return TroughWidthDistribution(kind, mean=_number(table, "mean", where, ge=K_MIN, le=K_MAX),
                                       sd=_number(table, "sd", where, gt=0.0, le=MAX_K_SD))
    low = _number(table, "min", where, ge=K_MIN, lt=K_MAX)
    high = _number(table, "max", where, le=K_MAX, why="the largest K a project may use")
    _above(high, low, "max", "min", "", where)
    return TroughWidthDistribution(kind, min=low, max=high)


def read_uncertainty_settings(table, where: str) -> UncertaintySettings:
    """The `[uncertainty]` table, checked; missing keys take their defaults.

    Parameters
    ----------
    table : dict  The TOML table (an empty dict gives every default).
    where : str   e.g. 'ostrey.toml [uncertainty]'.
    """
    _check_table(table, where)
    _check_keys(table, UNCERTAINTY_KEYS, where)
    samples = _whole(table, "samples", where, DEFAULT_SAMPLES, MIN_SAMPLES, MAX_SAMPLES)
    seed = _whole(table, "seed", where, 0, 0, MAX_SEED)
    correlated = table.get("drives_correlated", False)
    if not isinstance(correlated, bool):
        raise InputError(f"{where}: drives_correlated must be true or false; got {shown(correlated)}")
    return UncertaintySettings(samples=samples, seed=seed, drives_correlated=correlated)


def read_drive_uncertainty(drive_table: dict, where: str, name: str) -> DriveUncertainty | None:
    """The distributions of one [[drives]] item: its optional `volume_loss_distribution` and
    `trough_width_distribution` sub-tables; None when it has neither.

    Parameters
    ----------
    drive_table : dict  The [[drives]] item as parsed.
    where : str         How messages name the item, e.g. 'ostrey.toml [[drives]] #1 "East"'; each sub-table's messages
                        add ' [drives.volume_loss_distribution]' or ' [drives.trough_width_distribution]'.
    name : str          The drive's name.
    """
    found = {}
    for key, reader in (("volume_loss_distribution", read_volume_loss_distribution),
                        ("trough_width_distribution", read_trough_width_distribution)):
        if key in drive_table:
            at = f"{where} [drives.{key}]"
            _check_table(drive_table[key], at)
            found[key] = reader(drive_table[key], at)
    if not found:
        return None
    return DriveUncertainty(name, volume_loss=found.get("volume_loss_distribution"),
                            trough_width=found.get("trough_width_distribution"))


def project_uncertainty(settings_table, drives: list[DriveUncertainty | None], where: str) -> ProjectUncertainty | None:
    """The project's uncertainty from the `[uncertainty]` table (None when absent) and each drive's distributions
    (`read_drive_uncertainty`, None for a drive without any); None when the project has neither.

    `[uncertainty]` without any distribution is an InputError: it would ask for a probabilistic run of nothing.

    Parameters
    ----------
    settings_table : dict or None  The parsed `[uncertainty]` table; None when the file has none.
    drives : list                  Per [[drives]] item, `read_drive_uncertainty`'s result.
    where : str                    How messages name `[uncertainty]`, e.g. 'ostrey.toml [uncertainty]'.
    """
    given = tuple(d for d in drives if d is not None)
    if settings_table is None and not given:
        return None
    if not given:
        raise InputError(f"{where}: no drive has a [drives.volume_loss_distribution] or "
                         "[drives.trough_width_distribution], so there is nothing to sample; give one, or remove "
                         "[uncertainty]")
    settings = read_uncertainty_settings({} if settings_table is None else settings_table, where)
    return ProjectUncertainty(settings=settings, drives=given)


# ------------------------------------------------------------------------------------------------------- helpers
def _check_table(value, where: str) -> None:
    if not isinstance(value, dict):
        raise InputError(f"{where}: must be a table (a header with keys under it); got {shown(value)}")


def _kind(table: dict, kinds: dict, where: str) -> str:
    """The table's `kind`, one of `kinds`; then every other key must be one of that kind's (a key of another kind
    is named as such; an unknown key gets the closest known one suggested)."""
    _check_table(table, where)
    choices = ", ".join(map(shown, kinds))
    if "kind" not in table:
        raise InputError(f"{where}: missing required key kind ({choices})")
    kind = table["kind"]
    if not isinstance(kind, str) or kind not in kinds:
        close = difflib.get_close_matches(kind, list(kinds), n=1, cutoff=0.85) if isinstance(kind, str) else []
        hint = f'; did you mean "{close[0]}"?' if close else ""
        raise InputError(f"{where}: kind must be one of {choices}; got {shown(kind)}{hint}")
    own = kinds[kind]
    others = {k for keys in kinds.values() for k in keys} - set(own)
    for key in table:
        if key == "kind" or key in own:
            continue
        if key in others:
            raise InputError(f"{where}: {key} does not apply to kind = {shown(kind)}, whose keys are "
                             f"{', '.join(own)}")
        _check_keys({key: None}, ("kind",) + own, where)
    return kind


def _check_keys(table: dict, allowed, where: str) -> None:
    """InputError for the first key of `table` not in `allowed`, with the closest known key suggested (the loader's
    wording)."""
    for key in table:
        if key not in allowed:
            close = difflib.get_close_matches(str(key), list(allowed), n=1, cutoff=0.6)
            hint = f'did you mean "{close[0]}"?' if close else f"known keys: {', '.join(allowed)}"
            raise InputError(f"{where}: unknown key {shown(key)}; {hint}")


def _number(table: dict, key: str, where: str, *, gt=None, ge=None, le=None, lt=None, why: str = "") -> float:
    """The value of a required key as a float within the bounds (gt: >, ge: >=, le: <=, lt: <); `why` says where a
    bound comes from."""
    if key not in table:
        raise InputError(f"{where}: missing required key {key}")
    value = table[key]
    symbol, words = (" %", " of per cent") if key.endswith("_pct") else ("", "")
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise InputError(f"{where}: {key} must be a number{words}; got {shown(value)}")
    if ((gt is not None and not value > gt) or (ge is not None and not value >= ge)
            or (le is not None and not value <= le) or (lt is not None and not value < lt)):
        because = f" ({why})" if why else ""
        raise InputError(f"{where}: {key} must be {bounds_text(gt, ge, le, lt, symbol)}{because}; got {shown(value)}")
    return float(value)


def _above(high: float, low: float, key: str, low_key: str, symbol: str, where: str) -> None:
    """InputError unless high > low: a distribution of zero width (or less) is refused."""
    if not high > low:
        raise InputError(f"{where}: {key} must be more than {low_key} ({low:g}{symbol}): a distribution of zero "
                         f"width is the deterministic run; got {high:g}")


def _whole(table: dict, key: str, where: str, default: int, low: int, high: int) -> int:
    """An optional whole number from `low` to `high`."""
    if key not in table:
        return default
    value = table[key]
    if isinstance(value, bool) or not isinstance(value, int) or not low <= value <= high:
        raise InputError(f"{where}: {key} must be a whole number from {low} to {high}; got {shown(value)}")
    return int(value)
