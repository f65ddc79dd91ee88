"""Section 3.8 of the report, when the run was probabilistic (distributions of volume loss or K in the project): how
the samples were drawn, the buildings most likely to be damaged with their probabilities and standard errors, the
utilities likely to reach their limits, a figure of the five most likely-to-be-damaged buildings (the histogram of
their damage category over the samples and their exceedance curves P(category >= k)), and the caution that the
probabilities are only as good as the distributions.

Read from the buildings and utilities layers (`prob_*` fields) and summary.json's "probabilistic".
"""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402  (after choosing the backend)
import numpy as np  # noqa: E402

from settle.procedure.summary import CAUTION  # noqa: E402

from .png import glyph_checked, save_png  # noqa: E402
from .report_layout import Block  # noqa: E402
from .report_tables import records, table_lines  # noqa: E402

HEADING = "3.8 Probability of damage"
LISTED = 15  # buildings tabled, most likely to reach category 2 first
DRAWN = 5  # buildings in the figure
CAUTION_WORDS = ("The probabilities are only as good as the distributions of volume loss and K, which are the "
                 "engineer's judgement. They describe the outcome of the greenfield method under that spread of its "
                 "inputs, not the likelihood of real damage, and they support, and do not replace, the judgement of "
                 "a qualified engineer and local codes.")


def _p(value, se) -> str:
    """A probability with its standard error, as "0.59 +- 0.02"."""
    try:
        v, e = float(value), float(se)
    except (TypeError, ValueError):
        return "-"
    return "-" if not np.isfinite(v) else f"{v:.2f} +- {e:.2f}"


def _likeliest(buildings, count: int):
    """The buildings most likely to reach category 2 (then category 1), at most `count`, with any chance at all."""
    p2 = buildings["prob_category_ge_2"].to_numpy(float)
    p1 = buildings["prob_category_ge_1"].to_numpy(float)
    order = np.lexsort((-np.nan_to_num(p1, nan=-1.0), -np.nan_to_num(p2, nan=-1.0)))
    order = [k for k in order if np.nan_to_num(p1[k]) > 0][:count]
    return buildings.iloc[order]


def probability_blocks(buildings, utilities, summary: dict, folder: Path, first_figure: int,
                       drive_labels: dict[str, str]) -> tuple[list[Block], list[Block]]:
    """(the text of section 3.8, its figure as an image block numbered `first_figure`); both empty when the run
    was not probabilistic. The figure is drawn into `folder`."""
    found = summary.get("probabilistic")
    if not isinstance(found, dict) or buildings is None or "prob_category_ge_1" not in buildings:
        return [], []
    b = [Block("subheading", HEADING)]
    inputs = "; ".join(f"{i['input']}: {i['distribution']}" for i in found.get("inputs", []))
    b.append(Block("text", f"{found['samples']} samples of a scrambled Sobol sequence (seed {found['seed']}; drives "
                           f"{'correlated' if found.get('drives_correlated') else 'independent'}) over: {inputs}. "
                           "Each drive's volume loss sample scales its reaches alike; its K sample scales every trough "
                           "width of the drive. Probabilities are for the construction stage of this run, each with "
                           "its standard error (+-)."))
    counts = found.get("buildings") or {}
    if counts:
        b.append(Block("text", "Buildings with a probability of category 2 (slight) or worse above 1 %: "
                               f"{counts['prob_category_ge_2_above_1pct']}; above 10 %: "
                               f"{counts['prob_category_ge_2_above_10pct']}; above 50 %: "
                               f"{counts['prob_category_ge_2_above_50pct']}."))
    rows = _likeliest(buildings, LISTED)
    if len(rows):
        mapping = {"id": "id", "cat": "category",
                   **{f"P(>={k})": (lambda r, k=k: _p(r[f"prob_category_ge_{k}"], r[f"prob_category_ge_{k}_se"]))
                      for k in range(1, 5)},
                   "driven by": lambda r: _short(r.get("driven_by"), drive_labels)}
        cols = [("id", 18, None), ("cat", 3, ".0f"), *[(f"P(>={k})", 12, None) for k in range(1, 5)],
                ("driven by", 24, None)]
        b.append(Block("text", f"The {len(rows)} building(s) most likely to reach category 2 or worse: cat is the "
                               "category at the design values; P(>=k) the probability of category k or worse; driven "
                               "by: the input whose rank correlation with the governing strain is largest."))
        b.append(Block("mono", lines=table_lines(cols, records(rows, mapping))))
    else:
        b.append(Block("text", "No building reaches category 1 in any sample."))
    if utilities is not None and "prob_near_or_exceeds" in utilities:
        likely = utilities[utilities["prob_near_or_exceeds"].fillna(0) > 0]
        likely = likely.sort_values("prob_near_or_exceeds", ascending=False, kind="stable")
        if len(likely):
            mapping = {"id": "id", "status": "status",
                       "P(near or exceeds)": lambda r: _p(r["prob_near_or_exceeds"], r["prob_near_or_exceeds_se"]),
                       "P(exceeds)": lambda r: _p(r["prob_exceeds"], r["prob_exceeds_se"]),
                       "driven by": lambda r: _short(r.get("driven_by"), drive_labels)}
            cols = [("id", 14, None), ("status", 13, None), ("P(near or exceeds)", 18, None), ("P(exceeds)", 12, None),
                    ("driven by", 24, None)]
            b.append(Block("text", "Utilities with a chance of reaching or passing their limits:"))
            b.append(Block("mono", lines=table_lines(cols, records(likely, mapping))))
    b.append(Block("text", CAUTION_WORDS))
    drawn = _likeliest(buildings, DRAWN)
    if not len(drawn):
        return b, []
    path = category_figure(drawn, Path(folder) / "probability-of-damage.png")
    b.append(Block("text", f"Figure {first_figure}: the damage category of the {len(drawn)} most likely-to-be-damaged "
                           "buildings over the samples, and their exceedance curves."))
    return b, [Block("image", f"Figure {first_figure}. Probability of damage: histogram of the damage category over "
                              f"the samples and exceedance curves P(category >= k) of the {len(drawn)} buildings most "
                              "likely to be damaged.", image=path)]


def _short(label, drive_labels: dict[str, str]) -> str:
    """An input's label with the drive's short name: "volume loss of D1"."""
    text = str(label or "")
    for name, short in drive_labels.items():
        text = text.replace(name, short)
    return text or "-"


@glyph_checked
def category_figure(buildings, path, dpi: int = 130) -> Path:
    """Left: for each building, the share of the samples in each damage category (0 to 4), P(category = k) =
    P(>= k) - P(>= k+1). Right: each building's exceedance curve P(category >= k) against k, with +-2 standard
    errors. Names drawn literally."""
    fig, (hist, curve) = plt.subplots(1, 2, figsize=(10.3, 6.2))
    k = np.arange(5)
    width = 0.8 / max(1, len(buildings))
    for j, (_, r) in enumerate(buildings.iterrows()):
        ge = np.array([1.0] + [float(r[f"prob_category_ge_{c}"]) for c in range(1, 5)] + [0.0])
        se = np.array([0.0] + [float(r[f"prob_category_ge_{c}_se"]) for c in range(1, 5)])
        label = str(r["id"])
        hist.bar(k - 0.4 + width * (j + 0.5), ge[:-1] - ge[1:], width=width, label=label)
        curve.errorbar(k[1:], ge[1:5], yerr=2 * se[1:], marker="o", capsize=3, label=label)
    hist.set_xticks(k)
    hist.set_xlabel("damage category")
    hist.set_ylabel("share of the samples")
    hist.set_title("Histogram: P(category = k)", fontsize=10)
    curve.set_xticks(k[1:])
    curve.set_ylim(-0.02, 1.02)
    curve.set_xlabel("damage category k")
    curve.set_ylabel("P(category >= k)")
    curve.set_title("Exceedance curves, +-2 standard errors", fontsize=10)
    for ax in (hist, curve):
        ax.grid(alpha=0.3)
        legend = ax.legend(fontsize=8)
        for text in legend.get_texts():
            text.set_parse_math(False)
    fig.text(0.01, 0.01, CAUTION, fontsize=7, color="0.3", wrap=True)
    fig.tight_layout(rect=(0, 0.05, 1, 1))
    return save_png(fig, path, dpi)
