"""Published values and rules of the trade that serve as defaults of project keys.

The method modules (`settle.assessments.face_methods`, `settle.assessments.building_damage`) and the route checks use
them as their own defaults too; they live here, in the inputs, so that the key schemas can name their defaults without
importing an assessment. Each value says where it comes from.
"""

#: Cover below this multiple of the outer diameter is warned about (a rule of thumb of the trade, common practice).
MIN_COVER_DIAMETERS = 2.0

#: Unit weight of water. [kN/m^3] (methods.md section 7 check values use 9.81.)
GAMMA_W = 9.81
#: Broms & Bennermark (1967) critical stability ratio: the face is taken as stable for N <= 6 (from memory,
#: methods.md section 7.1 a).
BROMS_BENNERMARK_CRITICAL_N = 6.0
#: Stability ratio below which the face movements of a tunnel in clay stay small: about 2 to 4 (Mair 1979;
#: O'Reilly 1988; from memory). The face support check holds N at or below 3, the middle of that range, as its
#: working-level minimum in cohesive ground.
BROMS_BENNERMARK_ALLOWABLE_N = 3.0
#: Lateral stress ratio in the silo above the wedge, about 0.8 in Anagnostou & Kovari (1994) (from memory,
#: methods.md section 7.1 c).
ANAGNOSTOU_KOVARI_SILO_RATIO = 0.8
#: Lateral stress ratio on the triangular sides of the wedge, about 0.4 in Anagnostou & Kovari (1994) (from memory,
#: methods.md section 7.1 c).
ANAGNOSTOU_KOVARI_WEDGE_RATIO = 0.4

#: Rankin (1988) stage 1 limits as used by Mair et al. (1996): slope 1/500 and settlement 10 mm (methods.md section
#: 5.3, threshold values from memory there; they are also the product owner's stated values).
RANKIN_SLOPE_LIMIT = 1.0 / 500.0
RANKIN_SETTLEMENT_LIMIT_MM = 10.0
#: Poisson's ratio of the beam in the Burland (1995) combination (methods.md section 5.4: 0.3, from memory there).
POISSON_RATIO = 0.3
