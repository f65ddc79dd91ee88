"""The report's references: each published work written out in full, and which of them a run's methods use.

Section 2 of the report cites works by author and year; section 5 lists, alphabetically, exactly the works the
methods of the run used: those of the assessments that ran, the stiffness correction only when a building used it,
the pipe-soil stiffness only when a pipe's bending strain was reduced, the back-analysis only when readings were
compared.

Bibliographic details as the method modules' docstrings and ../shared/methods.md give them; where those give no
pages or volume, the details here are from memory (marked below) and should be checked against the publications.
"""
from __future__ import annotations

#: Every work the report may cite: key -> the reference in full (authors, year, title, journal or book, volume,
#: pages).
REFERENCES = {
    "peck1969": "Peck, R. B. (1969). Deep excavations and tunnelling in soft ground. Proceedings of the 7th "
                "International Conference on Soil Mechanics and Foundation Engineering, Mexico City, State-of-the-art "
                "volume, 225-290.",
    "oreilly_new1982": "O'Reilly, M. P. & New, B. M. (1982). Settlements above tunnels in the United Kingdom - their "
                       "magnitude and prediction. Tunnelling '82, Institution of Mining and Metallurgy, London, "
                       "173-181.",
    "attewell_woodman1982": "Attewell, P. B. & Woodman, J. P. (1982). Predicting the dynamics of ground settlement "
                            "and its derivatives caused by tunnelling in soil. Ground Engineering 15(8), 13-22.",
    "attewell_yeates_selby1986": "Attewell, P. B., Yeates, J. & Selby, A. R. (1986). Soil Movements Induced by "
                                 "Tunnelling and their Effects on Pipelines and Structures. Blackie, Glasgow.",
    "mair_taylor_bracegirdle1993": "Mair, R. J., Taylor, R. N. & Bracegirdle, A. (1993). Subsurface settlement "
                                   "profiles above tunnels in clays. Geotechnique 43(2), 315-320.",
    "moh_ju_hwang1996": "Moh, Z. C., Ju, D. H. & Hwang, R. N. (1996). Ground movements around tunnels in soft "
                        "ground. In Mair, R. J. & Taylor, R. N. (eds), Geotechnical Aspects of Underground "
                        "Construction in Soft Ground, Balkema, Rotterdam, 725-730.",
    "rankin1988": "Rankin, W. J. (1988). Ground movements resulting from urban tunnelling: predictions and effects. "
                  "Engineering Geology of Underground Movements, Geological Society Engineering Geology Special "
                  "Publication 5, London, 79-92.",
    # pages from memory
    "mair_taylor_burland1996": "Mair, R. J., Taylor, R. N. & Burland, J. B. (1996). Prediction of ground movements "
                               "and assessment of risk of building damage due to bored tunnelling. In Mair, R. J. & "
                               "Taylor, R. N. (eds), Geotechnical Aspects of Underground Construction in Soft Ground, "
                               "Balkema, Rotterdam, 713-718.",
    "burland_wroth1974": "Burland, J. B. & Wroth, C. P. (1974). Settlement of buildings and associated damage. "
                         "Proceedings of the Conference on Settlement of Structures, Cambridge, Pentech Press, London, "
                         "611-654.",
    "boscardin_cording1989": "Boscardin, M. D. & Cording, E. J. (1989). Building response to excavation-induced "
                             "settlement. Journal of Geotechnical Engineering, ASCE 115(1), 1-21.",
    # volume and pages from memory
    "burland1995": "Burland, J. B. (1995). Assessment of risk of damage to buildings due to tunnelling and "
                   "excavation. Proceedings of the 1st International Conference on Earthquake Geotechnical "
                   "Engineering, Tokyo, Balkema, Rotterdam, Vol. 3, 1189-1201.",
    # journal volume and pages from memory (methods.md 5.5)
    "potts_addenbrooke1997": "Potts, D. M. & Addenbrooke, T. I. (1997). A structure's influence on "
                             "tunnelling-induced ground movements. Proceedings of the Institution of Civil Engineers, "
                             "Geotechnical Engineering 125(2), 109-125.",
    "franzius_potts_burland2006": "Franzius, J. N., Potts, D. M. & Burland, J. B. (2006). The response of surface "
                                  "structures to tunnel construction. Proceedings of the Institution of Civil "
                                  "Engineers, Geotechnical Engineering 159(1), 3-17.",
    "bracegirdle1996": "Bracegirdle, A., Mair, R. J., Nyren, R. J. & Taylor, R. N. (1996). A methodology for "
                       "evaluating potential damage to cast iron pipes induced by tunnelling. In Mair, R. J. & "
                       "Taylor, R. N. (eds), Geotechnical Aspects of Underground Construction in Soft Ground, "
                       "Balkema, Rotterdam, 569-575.",
    # pages from memory
    "vorster2005": "Vorster, T. E. B., Klar, A., Soga, K. & Mair, R. J. (2005). Estimating the effects of tunneling "
                   "on existing pipelines. Journal of Geotechnical and Geoenvironmental Engineering, ASCE 131(11), "
                   "1399-1410.",
    "anagnostou_kovari1994": "Anagnostou, G. & Kovari, K. (1994). The face stability of slurry-shield-driven "
                             "tunnels. Tunnelling and Underground Space Technology 9(2), 165-174.",
    "broms_bennermark1967": "Broms, B. B. & Bennermark, H. (1967). Stability of clay at vertical openings. Journal "
                            "of the Soil Mechanics and Foundations Division, ASCE 93(SM1), 71-94.",
    "mair1979": "Mair, R. J. (1979). Centrifugal modelling of tunnel construction in soft clay. PhD thesis, "
                "University of Cambridge.",
    "oreilly1988": "O'Reilly, M. P. (1988). Evaluating and predicting ground settlements caused by tunnelling in "
                   "London Clay. Tunnelling '88, Institution of Mining and Metallurgy, London, 231-241.",
    "davis1980": "Davis, E. H., Gunn, M. J., Mair, R. J. & Seneviratne, H. N. (1980). The stability of shallow "
                 "tunnels and underground openings in cohesive material. Geotechnique 30(4), 397-416.",
    "macklin1999": "Macklin, S. R. (1999). The prediction of volume loss due to tunnelling in overconsolidated clay "
                   "based on heading geometry and stability number. Ground Engineering 32(4), 30-33.",
    # proceedings details from memory
    "luger_hergarden1988": "Luger, H. J. & Hergarden, H. J. A. M. (1988). Directional drilling in soft soil: "
                           "influence of mud pressures. Proceedings of the International Symposium No-Dig '88, "
                           "Washington DC.",
    "jaky1944": "Jaky, J. (1944). The coefficient of earth pressure at rest. Journal of the Society of Hungarian "
                "Architects and Engineers 78(22), 355-358.",
    "jones_clayton2013": "Jones, B. D. & Clayton, C. R. I. (2013). Guidelines for Gaussian curve-fitting to "
                         "settlement data. World Tunnel Congress 2013, Geneva.",
    "cameron_miller2015": "Cameron, A. C. & Miller, D. L. (2015). A practitioner's guide to cluster-robust "
                          "inference. Journal of Human Resources 50(2), 317-372.",
    # journal details from memory
    "bell_mccaffrey2002": "Bell, R. M. & McCaffrey, D. F. (2002). Bias reduction in standard errors for linear "
                          "regression with multi-stage samples. Survey Methodology 28(2), 169-181.",
}

#: The works each method cites in section 2, as (key, citation in the text).
CITED = {
    "greenfield": ("peck1969", "oreilly_new1982", "attewell_woodman1982", "attewell_yeates_selby1986",
                   "mair_taylor_bracegirdle1993", "moh_ju_hwang1996"),
    "buildings": ("rankin1988", "mair_taylor_burland1996", "burland_wroth1974", "burland1995",
                  "boscardin_cording1989"),
    "stiffness_correction": ("potts_addenbrooke1997", "franzius_potts_burland2006"),
    "utilities": ("attewell_yeates_selby1986", "bracegirdle1996"),
    "pipe_stiffness": ("vorster2005",),
    "face": ("anagnostou_kovari1994", "broms_bennermark1967", "mair1979", "oreilly1988", "davis1980", "macklin1999",
             "luger_hergarden1988", "jaky1944"),
    "monitoring": ("peck1969", "jones_clayton2013", "cameron_miller2015", "bell_mccaffrey2002"),
}


def references_used(methods: set[str]) -> list[str]:
    """The works cited by these methods (keys of CITED), in full, each once, in alphabetical order."""
    keys = {k for m in methods for k in CITED.get(m, ())}
    return sorted((REFERENCES[k] for k in keys), key=lambda text: text.casefold())
