"""Reference values from outside the project, each with its source.

Handbook constants are used only as *inputs* to simulated studies, never as claims about
measured data.
"""

# Octanol-water log P, from memory: CRC Handbook of Chemistry and Physics, table of
# octanol-water partition coefficients (edition not recorded), as recalled from its copy in
# the `chemicals` package (chemicals.environment.logP(CASRN, method='CRC')); neither was read
# during this work. Inputs of simulations only, so their last digit does not matter.
LOGP_BENZOIC_ACID = 1.88
LOGP_PHENOL = 1.48
LOGP_ANILINE = 0.90
LOGP_PYRIDINE = 0.65

# pKa of benzoic acid at 25 degC, from memory (J. Res. Natl. Bur. Stand. 1967, 71A, 379, as
# recalled; not read). Read from the abstract of R. M. Kettler, D. J. Wesolowski,
# D. A. Palmer, J. Solution Chem. 24 (1995), no. 4: log Ka = -4.206 +/- 0.006 at 25 degC and
# 1 bar, which 4.210 lies within.
PKA_BENZOIC_ACID = 4.210
# pKa of the anilinium ion at 25 degC, from memory: NIST Standard Reference Database 46
# (Critically Selected Stability Constants of Metal Complexes), recalled through the appendix
# of acid dissociation constants in Harris, Quantitative Chemical Analysis; not read.
PKA_ANILINIUM = 4.601

# IUPAC Gold Book, "fraction extracted" (F02503): E_n = 1 - (rD + 1)^-n, from memory (the
# entry was not re-read during this work). The worked check is this project's own arithmetic
# of that formula, not a published example: D = 2, V_aq = 100 mL, V_org = 50 mL per portion
# (r = 0.5): remaining 0.5, 0.25, 0.125, 0.0625 after 1-4 portions; 150 mL as ten 15 mL
# portions leaves 0.0725 (= 1.3^-10 = 0.07254); the split limit is e^-3 = 0.0498.
WORKED_D = 2.0
WORKED_V_AQ = 100.0
WORKED_V_ORG = 50.0
WORKED_REMAINING = (0.5, 0.25, 0.125, 0.0625)
WORKED_TEN_WAY_REMAINING = 0.0725
WORKED_SPLIT_LIMIT = 0.0498
