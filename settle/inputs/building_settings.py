"""Settings of the building assessment: the `[buildings]` keys the assessment uses, with their defaults and checks."""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from .footprints import MODIFICATION_ATTRIBUTES
from .published_defaults import POISSON_RATIO, RANKIN_SETTLEMENT_LIMIT_MM, RANKIN_SLOPE_LIMIT
from .tables import shown

#: Spacing of the grid of stage 1 points inside a footprint (our choice; the walls are sampled more finely). [m]
INTERIOR_SPACING_M = 1.0

STIFFNESS_METHODS = {
    "none": "none",
    "potts_addenbrooke_1997": "Potts & Addenbrooke (1997)",
    "franzius_2006": "Franzius, Potts & Burland (2006)",
}


@dataclass(frozen=True)
class AssessmentOptions:
    """Project-level settings of the building assessment (the `[buildings]` keys the engine uses)."""

    poisson_ratio: float = POISSON_RATIO
    screening_slope_limit: float = RANKIN_SLOPE_LIMIT
    screening_settlement_limit_mm: float = RANKIN_SETTLEMENT_LIMIT_MM
    interior_spacing_m: float = INTERIOR_SPACING_M
    stiffness_correction: str = "none"  # a key of STIFFNESS_METHODS
    modification_factors: dict = field(default_factory=dict)  # MODIFICATION_ATTRIBUTES -> project-level M [-]
    key_prefix: str = "[buildings]"  # where these keys live, for messages

    def check(self) -> None:
        """InputError naming the key for a value out of range."""
        def bad(key, rule, value):
            raise InputError(f"{self.key_prefix}: {key} must be {rule}; got {shown(value)}")

        if not 0.0 <= self.poisson_ratio < 0.5:
            bad("poisson_ratio", "from 0 to less than 0.5", self.poisson_ratio)
        if not self.screening_slope_limit > 0:
            bad("screening_slope_limit", "more than 0", self.screening_slope_limit)
        if not self.screening_settlement_limit_mm > 0:
            bad("screening_settlement_limit_mm", "more than 0 mm", self.screening_settlement_limit_mm)
        if not self.interior_spacing_m > 0:
            bad("interior_spacing_m", "more than 0 m", self.interior_spacing_m)
        if self.stiffness_correction not in STIFFNESS_METHODS:
            bad("stiffness_correction", f"one of {', '.join(map(shown, STIFFNESS_METHODS))}",
                self.stiffness_correction)
        for key, value in self.modification_factors.items():
            if key not in MODIFICATION_ATTRIBUTES:
                bad("a modification factor key", f"one of {', '.join(MODIFICATION_ATTRIBUTES)}", key)
            if value is not None and not (np.isfinite(value) and value >= 0):
                bad(key, "a number at least 0", value)
