"""Section 3.7 of the report, when the run compared monitoring readings (`settle run --readings`): each monitored
point's latest reading against the prediction and the fitted model, with its trigger status; the fitted volume loss
and trough width factor with their 95 % intervals; and the figure of each monitored cross-section, with the trigger
levels drawn on it.

Read from the run's `readings` layer, summary.json's "readings" (counts, trigger levels, fits) and the section
figures the run wrote (summary.json's outputs "readings_sections").
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from .report_layout import Block
from .report_tables import records, table_lines

HEADING = "3.7 Monitoring: readings against the prediction"


def _interval(values) -> str:
    """A 95 % interval [low, high] as "low to high", "-" when not determined."""
    try:
        low, high = (float(v) for v in values)
    except (TypeError, ValueError):
        return "-"
    return f"{low:.3g} to {high:.3g}" if np.isfinite(low) and np.isfinite(high) else "-"


def monitoring_blocks(layer, summary: dict, out_dir: Path, drive_labels: dict[str, str],
                      first_figure: int) -> tuple[list[Block], list[Block]]:
    """(the text of section 3.7, its figures as image blocks numbered from `first_figure`); both empty when the run
    compared no readings."""
    readings = summary.get("readings")
    if layer is None or not isinstance(readings, dict):
        return [], []
    b = [Block("subheading", HEADING)]
    levels = readings.get("trigger_levels_mm") or {}
    counts = readings.get("by_trigger_status") or {}
    b.append(Block("text", f"{readings.get('points', len(layer))} monitored points compared at their latest reading: "
                   + "; ".join(f"{k}: {v}" for k, v in counts.items())
                   + (f". Trigger levels: amber {levels['amber_mm']:g} mm, red {levels['red_mm']:g} mm, on the size of "
                      "the movement (settlement or heave)." if levels else ".")
                   + (f" {readings['rows_left_out']} row(s) of the readings file were left out (see the run's "
                      "warnings)." if readings.get("rows_left_out") else "")))
    order = np.lexsort((layer["point_id"].astype(str).to_numpy(), layer["drive"].astype(str).to_numpy()))
    rows = layer.iloc[order]
    mapping = {"point": "point_id", "drive": lambda r: drive_labels.get(r["drive"], r["drive"]),
               "date": lambda r: str(r["date"])[:10], "face m": "face_chainage_m", "reading mm": "reading_mm",
               "predicted mm": "predicted_mm", "fitted mm": "fitted_mm", "diff mm": "difference_mm",
               "trigger": "trigger_status"}
    cols = [("point", 14, None), ("drive", 5, None), ("date", 10, None), ("face m", 7, ".1f"),
            ("reading mm", 10, ".2f"), ("predicted mm", 12, ".2f"), ("fitted mm", 9, ".2f"), ("diff mm", 8, "+.2f"),
            ("trigger", 13, None)]
    b.append(Block("mono", lines=table_lines(cols, records(rows, mapping))))
    b.append(Block("text", "reading: the point's latest reading (settlement positive downward) at its face position; "
                           "predicted: the project's model at that face; fitted: the model with the back-analysed "
                           "volume loss and K; diff: reading less predicted."))
    fits = readings.get("fits") or []
    if fits:
        rows = [{"drive": drive_labels.get(f["drive"], f["drive"]), "part": f.get("part"),
                 "VL %": f.get("volume_loss_pct"), "VL 95 %": _interval(f.get("volume_loss_pct_ci95")),
                 "K": f.get("trough_width_k"), "K 95 %": _interval(f.get("trough_width_k_ci95")),
                 "points": f.get("points_used"), "readings": f.get("readings_used"), "RMS mm": f.get("rms_mm")}
                for f in fits]
        b.append(Block("text", "Back-analysed volume loss and trough width factor, with their 95 % intervals "
                               "(standard errors robust to readings clustered by point):"))
        b.append(Block("mono", lines=table_lines(
            [("drive", 5, None), ("part", 20, None), ("VL %", 6, ".3f"), ("VL 95 %", 15, None), ("K", 5, ".3f"),
             ("K 95 %", 15, None), ("points", 6, ".0f"), ("readings", 8, ".0f"), ("RMS mm", 6, ".2f")], rows)))
    else:
        b.append(Block("text", "No drive had enough readings past the face to fit."))
    figures = []
    names = (summary.get("outputs") or {}).get("readings_sections") or []
    for name in names:
        path = Path(out_dir) / name
        if path.is_file():
            figures.append(Block("image", f"Figure {first_figure + len(figures)}. Monitored cross-section "
                                          f"{name.removeprefix('section_').removesuffix('.png')}: latest readings, the "
                                          "design and the fitted troughs, trigger levels.", image=path))
    if figures:
        b.append(Block("text", f"Figures {first_figure} to {first_figure + len(figures) - 1}: the monitored cross-"
                               "sections, offset looking up-chainage (left negative, right positive)."
                       if len(figures) > 1 else f"Figure {first_figure}: the monitored cross-section, offset looking "
                                                "up-chainage (left negative, right positive)."))
    return b, figures
