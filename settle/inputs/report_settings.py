"""Document control of the report: the `[report]` keys, with their defaults and checks.

[report]                optional: what the title block, the revision table, the page footers and the PDF's
                        metadata say. Every key is optional.
    document_number     text: the consultancy's document number, printed in every page's footer.
    revision            text: the revision issued (for example "B" or "P02"); default: the last of
                        [[report.revisions]]. When both are given they must agree.
    title               text: the report's title; default: "<project name>: ground movement assessment".
    client              text.
    prepared_by         text: the author (the PDF's Author too).
    checked_by          text.
    approved_by         text.
    paper               "A4" | "A3", default "A4": the size of the figure pages (A3: plans and sections on A3
                        landscape; the text stays on A4 portrait).
[[report.revisions]]    optional, oldest first: the revision table of page 1.
    revision            text, required, unique.
    date                date, required: a TOML date (2026-11-30) or the same in quotes.
    description         text, required (for example "Issued for approval").

Text values are at most `MAX_TEXT_CHARS` characters on one line (no control characters): they are printed as given.
"""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

from ..errors import InputError
from .tables import shown

REPORT_KEYS = ("document_number", "revision", "title", "client", "prepared_by", "checked_by", "approved_by",
               "paper", "revisions")
REVISION_KEYS = ("revision", "date", "description")
PAPERS = ("A4", "A3")
#: The longest text a [report] key may hold (it must fit a line of the title block). [characters]
MAX_TEXT_CHARS = 120


@dataclass(frozen=True)
class Revision:
    """One row of the revision table: the revision, its date (ISO text) and what it was issued for."""

    revision: str
    date: str
    description: str


@dataclass(frozen=True)
class DocumentControl:
    """The `[report]` table as read (None where a key is not given)."""

    document_number: str | None = None
    revision: str | None = None
    title: str | None = None
    client: str | None = None
    prepared_by: str | None = None
    checked_by: str | None = None
    approved_by: str | None = None
    paper: str = "A4"
    revisions: tuple[Revision, ...] = ()

    def as_dict(self) -> dict:
        """JSON-ready, as summary.json's inputs and the report read it."""
        return {"document_number": self.document_number, "revision": self.revision, "title": self.title,
                "client": self.client, "prepared_by": self.prepared_by, "checked_by": self.checked_by,
                "approved_by": self.approved_by, "paper": self.paper,
                "revisions": [{"revision": r.revision, "date": r.date, "description": r.description}
                              for r in self.revisions]}


def _text(table: dict, key: str, where: str, required: bool = False) -> str | None:
    if key not in table:
        if required:
            raise InputError(f"{where}: missing required key {key}")
        return None
    value = table[key]
    if not isinstance(value, str) or not value.strip():
        raise InputError(f"{where}: {key} must be non-empty text in quotes; got {shown(value)}")
    if any(ord(c) < 32 or 127 <= ord(c) < 160 for c in value):
        raise InputError(f"{where}: {key} must be one line of text without control characters; got {shown(value)}")
    if len(value) > MAX_TEXT_CHARS:
        raise InputError(f"{where}: {key} must be at most {MAX_TEXT_CHARS} characters; got {len(value)}")
    return value.strip()


def _date(table: dict, where: str) -> str:
    """A revision's date as ISO text: a TOML date, or the same in quotes (YYYY-MM-DD)."""
    if "date" not in table:
        raise InputError(f"{where}: missing required key date")
    value = table["date"]
    if isinstance(value, dt.datetime):
        raise InputError(f"{where}: date must be a date without a time, such as 2026-11-30; got {shown(value)}")
    if isinstance(value, dt.date):
        return value.isoformat()
    if isinstance(value, str) and len(value.strip()) == 10:
        try:
            return dt.date.fromisoformat(value.strip()).isoformat()
        except ValueError:
            pass
    raise InputError(f"{where}: date must be a date such as 2026-11-30 (YYYY-MM-DD); got {shown(value)}")


def read_document_control(table: dict, where: str, check_keys) -> DocumentControl:
    """The `[report]` table, checked: `check_keys(table, known, where)` refuses unknown keys (the loader's)."""
    check_keys(table, REPORT_KEYS, where)
    texts = {k: _text(table, k, where) for k in REPORT_KEYS if k not in ("paper", "revisions")}
    paper = table.get("paper", "A4")
    if paper not in PAPERS:
        raise InputError(f"{where}: paper must be one of {', '.join(map(shown, PAPERS))}; got {shown(paper)}")
    revisions = _revisions(table.get("revisions"), where, check_keys)
    if revisions:
        last = revisions[-1].revision
        if texts["revision"] is None:
            texts["revision"] = last
        elif texts["revision"] != last:
            raise InputError(f"{where}: revision {shown(texts['revision'])} is not the last of [[report.revisions]] "
                             f"({shown(last)}); list the revisions oldest first, the one issued last")
    return DocumentControl(paper=paper, revisions=revisions, **texts)


def _revisions(items, where: str, check_keys) -> tuple[Revision, ...]:
    if items is None:
        return ()
    if not isinstance(items, list) or not all(isinstance(item, dict) for item in items):
        raise InputError(f"{where}: revisions must be one or more tables, each under a [[report.revisions]] header; "
                         f"got {shown(items)}")
    out = []
    for k, item in enumerate(items, start=1):
        at = f"{where.removesuffix(' [report]')} [[report.revisions]] #{k}"
        check_keys(item, REVISION_KEYS, at)
        out.append(Revision(_text(item, "revision", at, required=True), _date(item, at),
                            _text(item, "description", at, required=True)))
    seen = [r.revision for r in out]
    twice = sorted({r for r in seen if seen.count(r) > 1})
    if twice:
        raise InputError(f"{where}: [[report.revisions]] lists revision {shown(twice[0])} more than once")
    dates = [r.date for r in out]
    if dates != sorted(dates):
        k = next(j for j in range(1, len(dates)) if dates[j] < dates[j - 1])
        raise InputError(f"{where}: [[report.revisions]] #{k + 1} is dated {dates[k]}, before #{k} ({dates[k - 1]}); "
                         "list the revisions oldest first")
    return tuple(out)
