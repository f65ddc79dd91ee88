"""What a run records of itself in its run folder (run.json): how it was asked for and what it read."""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import InputError
from ..inputs.file_hashes import file_hashes

#: Run dates must lie in this span (our choice: nothing a drive is assessed for lies outside it).
DATE_RANGE = (dt.date(1900, 1, 1), dt.date(2200, 12, 31))


@dataclass
class RunRecord:
    """How a run was asked for and the files it read."""

    command: list[str] | None = None  # the command line as given (None from Python)
    options: dict = field(default_factory=dict)  # the options that shape the outputs
    run_date: str | None = None  # "YYYY-MM-DD" when the user gives one; the only date the outputs carry
    inputs: dict[Path, str] = field(default_factory=dict)  # resolved path -> sha256, every file the run read


def run_date(text, option: str = "--date") -> str | None:
    """A run date as "YYYY-MM-DD" (None stays None); InputError naming the option for anything else."""
    if text is None:
        return None
    try:
        day = dt.date.fromisoformat(str(text)) if len(str(text)) == 10 else None
    except ValueError:
        day = None
    if day is None:
        raise InputError(f"{option} must be a date written YYYY-MM-DD; got {text!r}")
    if not DATE_RANGE[0] <= day <= DATE_RANGE[1]:
        raise InputError(f"{option} must lie between {DATE_RANGE[0]} and {DATE_RANGE[1]}; got {text}")
    return day.isoformat()


def record_run(project, command=None, options=None, date=None, extra_inputs=()) -> RunRecord:
    """The record of a run of `project`: its files (the project's `input_files`, or its own path) and any others it
    read (a readings file), hashed now."""
    files = list(getattr(project, "input_files", ()) or ([project.path] if project.path else []))
    return RunRecord(command=list(command) if command is not None else None, options=dict(options or {}),
                     run_date=run_date(date), inputs=file_hashes(files + [Path(p) for p in extra_inputs]))
