"""Figures of the monitoring comparison: one PNG per monitored cross-section (readings against the design and the
fitted troughs), drawn from `settle.monitoring.Section`.

The horizontal axis is the offset from the drive's axis looking up-chainage, left of the axis negative and right
positive, as on every cross-section of the figures (`gis_out.figures.OFFSET_LABEL`). `Section.offset_m` and
`Section.profile_offset_m` hold left-positive offsets (`settle.monitoring.sections`): they are negated for drawing
only, the data are left as they are.
"""
from __future__ import annotations

import math
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402  (after choosing the backend)
import numpy as np  # noqa: E402

from settle.errors import InputError  # noqa: E402
from settle.monitoring.sections import Section  # noqa: E402
from settle.procedure.summary import CAUTION  # noqa: E402

from .figures import MIN_TEXT_PT, OFFSET_LABEL, wrap_to_width  # noqa: E402
from .png import glyph_checked, save_png  # noqa: E402

#: Trigger lines: (colour, dash pattern). Amber is a light orange drawn dashed and red a dark red drawn dash-dot, so
#: the two differ in lightness and in pattern as well as in hue: they stay apart in a grey print and for a reader
#: who does not tell red from orange. (our choice)
TRIGGER_LOOKS = {"amber": ("#e69f00", (0, (6, 3))), "red": ("#8b0000", (0, (8, 3, 1.5, 3)))}
FIGURE_IN = (8.0, 4.8)  # width, height of a section figure [in]


@glyph_checked
def section_png(section: Section, path, dpi: int = 120, amber_mm: float | None = None,
                red_mm: float | None = None) -> Path:
    """Settlement across one monitored section, written as a PNG (see `section_figure`). Written to a temporary
    file, then moved.

    Parameters
    ----------
    section : Section           The monitored section (`settle.monitoring.sections.monitored_sections`).
    path : str or Path          The PNG to write; its folder must exist.
    dpi : int                   Resolution. [dots per inch]
    amber_mm, red_mm : float, optional
                                Trigger levels, drawn as lines when given (see `section_figure`). [mm]

    Returns
    -------
    Path  The absolute path written.
    """
    return save_png(section_figure(section, amber_mm, red_mm), path, dpi)


def section_figure(section: Section, amber_mm: float | None = None, red_mm: float | None = None):
    """Settlement across one monitored section as a matplotlib Figure: each point's latest reading, the design trough
    and the fitted trough, at the face of the latest reading. Settlement is drawn downward; the horizontal axis is
    the offset looking up-chainage, left negative (`OFFSET_LABEL`). The drive's name and the point ids are drawn
    literally (no math in "$").

    Parameters
    ----------
    section : Section           The monitored section.
    amber_mm, red_mm : float, optional
                                Trigger levels [mm], each a number more than 0 (red more than amber when both are
                                given). Each is drawn as a horizontal line at that settlement, labelled with its
                                level, and, where any reading is heave (negative settlement), at minus that level
                                too: the trigger status compares the size of the movement with the levels
                                (`settle.monitoring.fitting.trigger_status`).

    Returns
    -------
    Figure

    Raises
    ------
    InputError  A trigger level that is not a positive number, or red not above amber.
    """
    levels = _trigger_levels(amber_mm, red_mm)
    fig, ax = plt.subplots(figsize=FIGURE_IN)
    try:
        x_points = -np.asarray(section.offset_m, dtype=float)  # left-positive data, drawn left negative
        x_profile = -np.asarray(section.profile_offset_m, dtype=float)
        readings = np.asarray(section.reading_mm, dtype=float)
        ax.plot(x_profile, section.design_mm, color="0.35", lw=1.6, ls="--", label="design (project file)")
        if np.isfinite(section.fitted_mm).any():
            ax.plot(x_profile, section.fitted_mm, color="#1f4e9c", lw=2.0, label="fitted (back-analysed)")
        ax.plot(x_points, readings, "o", ms=6, mfc="#56b4e9", mec="k", label="latest reading")
        for pid, x, s in zip(section.point_id, x_points, readings):
            ax.annotate(str(pid), (x, s), textcoords="offset points", xytext=(3, 5), fontsize=MIN_TEXT_PT,
                        parse_math=False)
        heave = bool(np.any(readings < 0.0))
        _trigger_lines(ax, levels, heave)
        _settlement_limits(ax, section, readings, levels, heave)
        ax.axvline(0.0, color="0.6", lw=0.8)
        ax.set_xlabel(OFFSET_LABEL, fontsize=8.5)
        ax.set_ylabel("settlement (mm, down)", fontsize=8.5)
        ax.tick_params(labelsize=8)
        ax.set_title(f"{section.drive}: section at chainage {section.chainage_m:.1f} m, face at "
                     f"{section.face_chainage_m:.1f} m", fontsize=9.5, parse_math=False)
        ax.grid(alpha=0.3)
        ax.legend(fontsize=MIN_TEXT_PT, loc="lower right")
        width = fig.get_figwidth()
        caution = wrap_to_width(CAUTION, MIN_TEXT_PT, width - 0.25)
        fig.text(0.1 / width, 0.06 / fig.get_figheight(), caution, fontsize=MIN_TEXT_PT, color="0.3", va="bottom")
        foot_in = 0.12 + (caution.count("\n") + 1) * MIN_TEXT_PT * 1.4 / 72.0
        fig.tight_layout(rect=(0, foot_in / fig.get_figheight(), 1, 1))
    except BaseException:
        plt.close(fig)
        raise
    return fig


def _trigger_levels(amber_mm, red_mm) -> dict:
    """The trigger levels given, as {"amber": mm, "red": mm}; an InputError for a level that is not a positive
    number, or red not above amber."""
    levels = {}
    for name, value in (("amber", amber_mm), ("red", red_mm)):
        if value is None:
            continue
        if isinstance(value, bool) or not isinstance(value, (int, float, np.number)) or not math.isfinite(value) \
                or value <= 0:
            raise InputError(f"{name}_mm must be a trigger level in mm, a number more than 0; got {value!r}")
        levels[name] = float(value)
    if len(levels) == 2 and not levels["red"] > levels["amber"]:
        raise InputError(f"red_mm must be more than amber_mm ({levels['amber']:g} mm); got {levels['red']:g}")
    return levels


def _trigger_lines(ax, levels: dict, heave: bool) -> None:
    """Horizontal lines at each trigger level, and at minus it when a reading is heave; each labelled at the left
    end of the axis (the legend sits at the lower right)."""
    for name, level in levels.items():
        colour, dashes = TRIGGER_LOOKS[name]
        for sign in ((1.0, -1.0) if heave else (1.0,)):
            text = f"{name} trigger {level:g} mm" + (" (heave)" if sign < 0 else "")
            ax.axhline(sign * level, color=colour, lw=1.4, ls=dashes, label=text if sign > 0 else None)
            ax.annotate(text, (0.0, sign * level), xycoords=("axes fraction", "data"), textcoords="offset points",
                        xytext=(3, 1), ha="left", va="bottom", fontsize=MIN_TEXT_PT, color=colour,
                        bbox=dict(boxstyle="square,pad=0.1", fc="white", ec="none", alpha=0.8))


def _settlement_limits(ax, section: Section, readings: np.ndarray, levels: dict, heave: bool) -> None:
    """Settlement drawn downward, over the readings, the troughs and every trigger line drawn, with a margin."""
    drawn = [readings, np.asarray(section.design_mm, float), np.asarray(section.fitted_mm, float), [0.0]]
    for level in levels.values():
        drawn.append([level, -level] if heave else [level])
    values = np.concatenate([np.ravel(v) for v in drawn])
    values = values[np.isfinite(values)]
    low, high = float(values.min()), float(values.max())
    pad = 0.08 * max(high - low, 0.5)
    ax.set_ylim(high + pad, low - pad)  # inverted: settlement down
