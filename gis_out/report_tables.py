"""Fixed-width tables and number formats of the report."""
from __future__ import annotations

import numpy as np
import pandas as pd


def num(value, fmt: str) -> str:
    """A number in the format, "-" where there is none."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        return "-" if value is None or value is pd.NA else str(value)
    return "-" if not np.isfinite(v) else format(v, fmt)


def table_lines(columns: list[tuple[str, int, object]], rows: list[dict]) -> list[str]:
    """Fixed-width table: columns are (title, width, how) where how is a format spec for numbers or None for text;
    text wider than its column is cut with "...". Returns the header, a rule, then one line per row."""
    def cell(value, width, how):
        text = num(value, how) if how else ("-" if value is None or value is pd.NA or
                                               (isinstance(value, float) and np.isnan(value)) else str(value))
        return text if len(text) <= width else text[:width - 3] + "..."

    head = " ".join(f"{t:<{w}}" if not how else f"{t:>{w}}" for t, w, how in columns)
    out = [head.rstrip(), "-" * len(head.rstrip())]
    for r in rows:
        out.append(" ".join(f"{cell(r.get(t), w, how):<{w}}" if not how else f"{cell(r.get(t), w, how):>{w}}"
                            for t, w, how in columns).rstrip())
    return out


def records(frame, mapping: dict) -> list[dict]:
    """Rows of a frame as dicts keyed by table column titles: mapping is title -> field name (or a function)."""
    out = []
    for _, row in frame.iterrows():
        out.append({title: (f(row) if callable(f) else row.get(f)) for title, f in mapping.items()})
    return out


def one_in(value) -> str:
    """A slope as "1/n"."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        return "-"
    return "-" if not np.isfinite(v) or v <= 0 else f"1/{1.0 / v:,.0f}"


