"""The fitted project file: the project file's text with back-analysed volume loss and K written in.

Every other line and comment is kept; paths are re-pointed so the file works from its new folder; the result is read
back and checked before it is returned (`settle.fitting` does the fitting).
"""
from __future__ import annotations

import json
import math
import os
import re
import tomllib
from pathlib import Path

from ..errors import InputError

#: Keys whose text value is a path relative to the project file; any other text value naming an existing file
#: beside the project file is taken to be a path too (keys added to the project file later).
PATH_KEYS = ("surface_points", "surface_raster", "alignment", "file")
_HEADER = re.compile(r"^\s*(\[\[?)\s*([A-Za-z0-9_.\-]+)\s*\]\]?\s*(#.*)?$")
_NUMBER = re.compile(r"^(?P<head>\s*(?P<key>volume_loss_pct|trough_width_k)\s*=\s*)(?P<value>[^#\s]+)"
                     r"(?P<rest>\s*(?:#(?P<comment>.*))?)$")
_TEXT = re.compile(r"""^(?P<head>\s*(?P<key>[A-Za-z0-9_\-]+)\s*=\s*)(?P<value>"(?:[^"\\]|\\.)*"|'[^']*')"""
                   r"(?P<rest>\s*(?:#.*)?)$")


def _toml_number(value: float) -> str:
    """A float as the fitted file writes it: 6 significant digits."""
    return f"{value:.6g}"


def _toml_text(value: str) -> str:
    """A TOML basic string (JSON string escapes are valid TOML)."""
    return json.dumps(value, ensure_ascii=False)


def _is_path(key: str, value: str, folder: Path) -> bool:
    if key in PATH_KEYS:
        return True
    try:
        return bool(value) and not Path(value).is_absolute() and (folder / value).is_file()
    except OSError:
        return False


def _blocks(lines: list[str]) -> list[dict]:
    """The array-of-tables items of the file in order: kind ("drive", "reach", "other"), drive and reach counters,
    the line of each number key and the first line."""
    blocks = [{"kind": "other", "keys": {}, "first": 0}]
    drive, reach = -1, -1
    for n, text in enumerate(lines):
        header = _HEADER.match(text)
        if header:
            name = header.group(2)
            if header.group(1) == "[[" and name == "drives":
                drive, reach = drive + 1, -1
                blocks.append({"kind": "drive", "drive": drive, "keys": {}, "first": n})
            elif header.group(1) == "[[" and name == "drives.reaches":
                reach += 1
                blocks.append({"kind": "reach", "drive": drive, "reach": reach, "keys": {}, "first": n})
            else:
                blocks.append({"kind": "other", "keys": {}, "first": n})
            continue
        number = _NUMBER.match(text)
        if number:
            blocks[-1]["keys"][number.group("key")] = n
    return blocks


def _read_project(project_path: Path) -> tuple[str, dict]:
    """The project file's text and its parsed TOML; InputError when it cannot be read."""
    try:
        text = project_path.read_text(encoding="utf-8")
        doc = tomllib.loads(text)
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        raise InputError(f"{project_path}: cannot be read as a project file: {exc}") from None
    return text, doc


def _expected_values(project_path: Path, doc: dict, fits: dict) -> dict:
    """Where each fit goes: (drive index, reach index in the file or None) -> (fit, value per key)."""
    drives = doc.get("drives", [])
    names = [item.get("name") for item in drives]
    expected = {}
    for (name, key), fit in fits.items():
        if name not in names:
            raise InputError(f"{project_path}: no [[drives]] item is named {json.dumps(name)}; the fits belong to "
                             "another project")
        i = names.index(name)
        reaches = drives[i].get("reaches", [])
        order = sorted(range(len(reaches)), key=lambda j: reaches[j].get("from_chainage_m"))  # as the loader sorts
        targets = [(i, None)] + [(i, j) for j in range(len(reaches))] if key is None else \
            [(i, None)] if key == 0 else [(i, order[key - 1])]
        for target in targets:
            expected[target] = (fit, {"volume_loss_pct": fit.volume_loss_pct, "trough_width_k": fit.trough_width_k})
    return expected


def _rewrite_values(lines: list[str], expected: dict) -> dict:
    """Write the fitted values over their lines in place; return the lines to add (line number after which ->
    text) for a trough_width_k the drive or reach did not give."""
    inserts = {}
    for block in _blocks(lines):
        if block["kind"] == "other":
            continue
        target = (block["drive"], None if block["kind"] == "drive" else block["reach"])
        if target not in expected:
            continue
        fit, values = expected[target]
        for key, value in values.items():
            se = fit.volume_loss_pct_se if key == "volume_loss_pct" else fit.trough_width_k_se
            note = f"fitted to monitoring, standard error {se:.2g}" if math.isfinite(se) else \
                "fitted to monitoring, no standard error"
            if key in block["keys"]:
                n = block["keys"][key]
                match = _NUMBER.match(lines[n])
                comment = match.group("comment")
                was = f"; was {match.group('value')}" + (f" ({comment.strip()})" if comment and comment.strip() else "")
                lines[n] = f"{match.group('head')}{_toml_number(value)}  # {note}{was}"
            elif "volume_loss_pct" in block["keys"]:
                n = block["keys"]["volume_loss_pct"]
                indent = re.match(r"\s*", lines[n]).group(0)
                inserts[n] = f"{indent}{key} = {_toml_number(value)}  # {note}; was not given (K of the layers)"
    return inserts


def _rewrite_paths(lines: list[str], folder: Path, out: Path | None) -> None:
    """Re-point, in place, every relative path of the file: relative to `out` when given, else absolute."""
    for n, line in enumerate(lines):
        match = _TEXT.match(line)
        if not match:
            continue
        value = tomllib.loads(f"v = {match.group('value')}")["v"]
        if not _is_path(match.group("key"), value, folder) or Path(value).is_absolute():
            continue
        target = (folder / value).resolve()
        new = os.path.relpath(target, out.resolve()) if out is not None else str(target)
        lines[n] = f"{match.group('head')}{_toml_text(Path(new).as_posix())}{match.group('rest')}"


def _finished_text(project_path: Path, lines: list[str], inserts: dict) -> str:
    """The rewritten lines with the added lines put in and the header saying where the file came from."""
    for n in sorted(inserts, reverse=True):
        lines.insert(n + 1, inserts[n])
    header = ["# Back-analysed: volume loss and trough width factor fitted to monitoring readings by settle.",
              f"# Made from {project_path.resolve().as_posix()}; paths point to its input files."]
    return "\n".join(header + lines) + "\n"


def fitted_project_toml(project_path, fits: dict, out_dir=None) -> str:
    """The project file's text with the fitted volume loss and K written in; every other line and comment kept.

    Values go where `back_analysis` fitted them: a whole-drive fit (key (name, None)) sets the drive's
    volume_loss_pct and trough_width_k and those of all its reaches; a per-reach fit sets the drive's values for key
    (name, 0) and the n-th reach in chainage order for key (name, n). A trough_width_k line is added where the
    drive or reach had none. Each changed line ends with a comment giving the standard error and the value it
    replaced. Paths (keys `PATH_KEYS`, and any other text naming a file beside the project file) are rewritten
    relative to `out_dir` when given, else as absolute paths, so the text can be saved in the output folder and read
    with `settle.project.load_project` unchanged.

    Raises
    ------
    InputError  When the file's layout hides a value from this line-by-line rewrite (e.g. an inline table); the
                message says which, and the values to write by hand.
    """
    project_path = Path(project_path)
    folder = project_path.parent
    text, doc = _read_project(project_path)
    lines = text.splitlines()
    expected = _expected_values(project_path, doc, fits)
    inserts = _rewrite_values(lines, expected)
    out = Path(out_dir) if out_dir is not None else None
    _rewrite_paths(lines, folder, out)
    new_text = _finished_text(project_path, lines, inserts)
    _check_fitted(project_path, doc, new_text, expected, folder, out)
    return new_text


def _check_fitted(project_path: Path, doc: dict, new_text: str, expected: dict, folder: Path, out) -> None:
    """Read the rewritten text back: every fitted value and every path must be there."""
    new = tomllib.loads(new_text)

    def fail(what: str):
        by_hand = "; ".join(f"[[drives]] #{i + 1}" + ("" if j is None else f" [[drives.reaches]] #{j + 1}") + ": "
                            + ", ".join(f"{k} = {_toml_number(v)}" for k, v in values.items())
                            for (i, j), (_, values) in sorted(expected.items(), key=lambda t: (t[0][0], t[0][1] or -1)))
        raise InputError(f"{project_path}: cannot write the fitted values into a copy of this file: {what}; write "
                         f"each key on a line of its own under its [[drives]] / [[drives.reaches]] header, or set "
                         f"the values by hand: {by_hand}")

    for (i, j), (_, values) in expected.items():
        item = new["drives"][i] if j is None else new["drives"][i].get("reaches", [{}] * (j + 1))[j]
        for key, value in values.items():
            if item.get(key) != float(_toml_number(value)):
                where = f"[[drives]] #{i + 1}" + ("" if j is None else f" [[drives.reaches]] #{j + 1}")
                fail(f"{where} {key} was not found on a line of its own")

    base = out.resolve() if out is not None else None

    def walk(old, now, where):
        if isinstance(old, dict):
            for key, value in old.items():
                if isinstance(value, str) and _is_path(key, value, folder) and not Path(value).is_absolute():
                    got = now.get(key) if isinstance(now, dict) else None
                    if not isinstance(got, str) or (Path(got) if base is None else base / got).resolve() != \
                            (folder / value).resolve():
                        fail(f"the path {where}{key} = {json.dumps(value)} could not be rewritten")
                else:
                    walk(value, now.get(key) if isinstance(now, dict) else None, f"{where}{key}.")
        elif isinstance(old, list):
            for k, value in enumerate(old):
                walk(value, now[k] if isinstance(now, list) and k < len(now) else None, where)

    walk(doc, new, "")
