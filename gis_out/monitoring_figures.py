"""Figures of the monitoring comparison: one PNG per monitored cross-section (readings against the design and the
fitted troughs), drawn from `settle.monitoring.Section`."""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402  (after choosing the backend)
import numpy as np  # noqa: E402

from settle.monitoring.sections import Section  # noqa: E402
from settle.procedure.summary import CAUTION  # noqa: E402

from .png import glyph_checked, save_png  # noqa: E402


@glyph_checked
def section_png(section: Section, path, dpi: int = 120) -> Path:
    """Settlement across one monitored section: each point's latest reading, the design trough and the fitted trough,
    at the face of the latest reading. Settlement is drawn downward. Written to a temporary file, then moved.
    The drive's name and the point ids are drawn literally (no math in "$")."""
    fig, ax = plt.subplots(figsize=(8.0, 4.6))
    ax.plot(section.profile_offset_m, section.design_mm, color="0.35", lw=1.6, ls="--", label="design (project file)")
    if np.isfinite(section.fitted_mm).any():
        ax.plot(section.profile_offset_m, section.fitted_mm, color="#1f4e9c", lw=2.0, label="fitted (back-analysed)")
    ax.plot(section.offset_m, section.reading_mm, "o", ms=6, mfc="#e08a1e", mec="k", label="latest reading")
    for pid, x, s in zip(section.point_id, section.offset_m, section.reading_mm):
        ax.annotate(str(pid), (x, s), textcoords="offset points", xytext=(3, 5), fontsize=7, parse_math=False)
    ax.invert_yaxis()
    ax.axvline(0.0, color="0.6", lw=0.8)
    ax.set_xlabel("offset from the drive axis, left positive (m)")
    ax.set_ylabel("settlement (mm, down)")
    ax.set_title(f"{section.drive}: section at chainage {section.chainage_m:.1f} m, face at "
                 f"{section.face_chainage_m:.1f} m", fontsize=10, parse_math=False)
    ax.grid(alpha=0.3)
    ax.legend(fontsize=8, loc="lower right")
    fig.text(0.01, 0.01, CAUTION, fontsize=6, color="0.3")
    fig.tight_layout(rect=(0, 0.03, 1, 1))
    return save_png(fig, path, dpi)
