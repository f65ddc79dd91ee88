"""Settings of the utility assessment: the `[utilities]` keys the assessment uses, with their defaults and checks."""
from __future__ import annotations

from dataclasses import dataclass

from ..errors import InputError


@dataclass(frozen=True)
class UtilityOptions:
    """Settings of the utility assessment.

    sample_spacing_m     largest step between samples along a pipe, more than 0 and at most 0.5. [m]
    curvature_step_m     h of the central second difference for curvature, more than 0 and at most 0.25. [m]
    near_limit_fraction  a utilisation from this up to 1 is "near limit"; more than 0 and less than 1 (our choice,
                         0.8 by default; no published source). [-]
    key                  how messages name the project table.
    """

    sample_spacing_m: float = 0.5
    curvature_step_m: float = 0.05
    near_limit_fraction: float = 0.8
    key: str = "[utilities]"

    def __post_init__(self):
        checks = (("sample_spacing_m", self.sample_spacing_m, 0.5, "m"),
                  ("curvature_step_m", self.curvature_step_m, 0.25, "m"))
        for name, value, top, unit in checks:
            if not (isinstance(value, (int, float)) and 0 < value <= top):
                raise InputError(f"{self.key} {name} must be more than 0 and at most {top:g} {unit}; got {value!r}")
        f = self.near_limit_fraction
        if not (isinstance(f, (int, float)) and 0 < f < 1):
            raise InputError(f"{self.key} near_limit_fraction must be more than 0 and less than 1; got {f!r}")
