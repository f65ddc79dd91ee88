"""Settings of the construction sequence: the `[construction]` keys, with their defaults and checks.

[construction]          optional.
    sequence            list of drive names in driving order, each drive once; default: the order of [[drives]].
    stage_step_m        number more than 0 and at most 50: how far the face advances between two stages of the
                        construction envelope; default (our choice): a quarter of the drive's smallest trough width
                        i = K z0, so the face never moves more than i/4 between two looks at the ground.
"""
from __future__ import annotations

from dataclasses import dataclass

from ..errors import InputError

CONSTRUCTION_KEYS = ("sequence", "stage_step_m")
#: The largest face step a user may give: beyond it the envelope would miss the stages that govern. [m]
MAX_STAGE_STEP_M = 50.0


@dataclass(frozen=True)
class Construction:
    """The construction sequence: drive names in driving order (None = the order of [[drives]]) and the face step
    of the envelope's stages (None = a quarter of each drive's smallest trough width). [m]"""

    sequence: tuple[str, ...] | None = None
    stage_step_m: float | None = None


def check_sequence(sequence, drive_names, where: str) -> tuple[str, ...] | None:
    """The sequence as a tuple of names, checked: every drive of the project once, nothing else."""
    if sequence is None:
        return None
    if not isinstance(sequence, list) or not all(isinstance(s, str) for s in sequence):
        raise InputError(f"{where}: sequence must be a list of drive names in quotes; got {sequence!r}")
    unknown = [s for s in sequence if s not in drive_names]
    if unknown:
        raise InputError(f"{where}: sequence names {unknown[0]!r}, which is not a drive of the project; drives: "
                         f"{', '.join(map(repr, drive_names))}")
    twice = sorted({s for s in sequence if sequence.count(s) > 1})
    if twice:
        raise InputError(f"{where}: sequence names {twice[0]!r} more than once; name every drive once")
    missing = [n for n in drive_names if n not in sequence]
    if missing:
        raise InputError(f"{where}: sequence leaves out {missing[0]!r}; name every drive once, in driving order")
    return tuple(sequence)
