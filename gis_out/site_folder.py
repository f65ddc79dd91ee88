"""The site service's data folder: created when missing, and where its latest fitted run is written.

    DIR/site.sqlite    the service's database (settle.service.store)
    DIR/latest/        the latest fitted run folder, written as one set by `run_folder.write_run`
"""
from __future__ import annotations

from pathlib import Path

from settle.errors import InputError

LATEST = "latest"


def make_data_folder(folder) -> Path:
    """The data folder, created (with its parents) when missing; InputError when a file has its name."""
    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise InputError(f"--data {folder}: exists and is not a folder")
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"--data {folder}: cannot be created: {exc.strerror}") from None
    return folder


def latest_run_folder(folder) -> Path:
    """Where the service keeps its latest fitted run."""
    return Path(folder) / LATEST


def palette() -> dict:
    """The project's colours for the site page, from the GIS styles: damage categories 0 to 5, utility statuses,
    trigger statuses (clear, amber, red: the utilities' fine, caution and beyond-the-limit colours), route, contour
    and face."""
    from settle.assessments.utilities import STATUSES
    from settle.monitoring.fitting import STATUS_AMBER, STATUS_CLEAR, STATUS_RED

    from .styles import (BEYOND_CRIMSON, CAUTION_AMBER, DAMAGE_COLOURS, DAMAGE_WORDS, OK_BLUE, SINGLE_SYMBOLS,
                         UTILITY_SYMBOLS)

    return {"damage": list(DAMAGE_COLOURS), "damage_words": list(DAMAGE_WORDS), "not_assessed": "#9a9a9a",
            "utility_status": {word: symbol.colour for word, symbol in zip(STATUSES, UTILITY_SYMBOLS)},
            "trigger": {STATUS_CLEAR: OK_BLUE, STATUS_AMBER: CAUTION_AMBER, STATUS_RED: BEYOND_CRIMSON},
            "route": SINGLE_SYMBOLS["route"][1].colour, "contour": SINGLE_SYMBOLS["settlement_lines"][1].colour,
            "face": SINGLE_SYMBOLS["route"][1].colour}
