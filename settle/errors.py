"""Errors meant for people, not tracebacks."""
from __future__ import annotations


class InputError(ValueError):
    """A mistake in the user's input: one line saying where (file, key or row), what is wrong and what was given.

    The command line prints the message alone and exits with status 2.
    """

    exit_status = 2


def where(path, key: str | None = None, row: int | None = None) -> str:
    """`file [key] row N` prefix for messages, with only the parts that are known."""
    parts = [str(path)] if path is not None else []
    if key:
        parts.append(key)
    if row is not None:
        parts.append(f"row {row}")
    return " ".join(parts)
