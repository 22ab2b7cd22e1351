"""Classifications of common extraction solvents, from outside the project, with their sources.

Physical data (density, boiling point, flash point) are checked against the `chemicals`
package's tables directly in tests/test_solvents.py; these are the classifications no library
carries.
"""

# Harmonised flammable-liquid category (EU CLP Regulation 1272/2008, Annex VI, Table 3; from
# memory), which uses the UN GHS criteria for categories 1-3. None: not classified as flammable.
CLP_FLAMMABLE_CATEGORY = {
    "diethyl ether": 1,            # Flam. Liq. 1, H224
    "ethyl acetate": 2,            # Flam. Liq. 2, H225
    "methyl tert-butyl ether": 2,
    "toluene": 2,
    "n-heptane": 2,
    "n-hexane": 2,
    "cyclohexane": 2,
    "isopropyl acetate": 2,
    "1-butanol": 3,                # Flam. Liq. 3, H226
    "dichloromethane": None,
    "chloroform": None,
}
# UN GHS category 4 (combustible) is not in the EU CLP; suppliers' GHS SDS give it for
# 1-octanol (flash point about 81 degC; from memory).
GHS_CATEGORY_4 = ("1-octanol",)

# ICH Q3C(R8) (2021) residual-solvent classes and class 2 concentration limits in ppm (Tables
# 2 and 3; from memory). 2-methyltetrahydrofuran was given a PDE of 50 mg/day, class 3, in R8
# (from memory). 1-octanol is not listed.
ICH_Q3C_CLASS = {
    "dichloromethane": (2, 600),
    "chloroform": (2, 60),
    "toluene": (2, 890),
    "n-hexane": (2, 290),
    "cyclohexane": (2, 3880),
    "ethyl acetate": (3, None),
    "diethyl ether": (3, None),
    "methyl tert-butyl ether": (3, None),
    "n-heptane": (3, None),
    "1-butanol": (3, None),
    "isopropyl acetate": (3, None),
    "2-methyltetrahydrofuran": (3, None),
    "1-octanol": (None, None),
}

# Halogenated solvents (by formula) and peroxide formers (lists of peroxidizable chemicals,
# e.g. Kelly, Chem. Health Saf. 1996; from memory): diethyl ether is on them; MTBE forms
# peroxides far more slowly (common practice); 2-MeTHF is sold stabilised against them.
HALOGENATED = {"dichloromethane", "chloroform"}
PEROXIDE_FORMERS = {"diethyl ether": "yes", "2-methyltetrahydrofuran": "yes",
                    "methyl tert-butyl ether": "low"}

# Which layer the solvent forms over a dilute aqueous phase (density of water 0.998 g/mL at
# 20 degC, CRC Handbook; common practice).
LOWER_LAYER = {"dichloromethane", "chloroform"}
