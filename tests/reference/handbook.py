"""Reference values from outside the project, each with its source.

Handbook constants are used only as *inputs* to simulated studies, never as claims about
measured data.
"""

# CRC Handbook of Chemistry and Physics, octanol-water log P (as tabulated via the `chemicals`
# package, chemicals.environment.logP(CASRN, method='CRC')).
LOGP_BENZOIC_ACID = 1.88
LOGP_PHENOL = 1.48
LOGP_ANILINE = 0.90
LOGP_PYRIDINE = 0.65

# pKa of benzoic acid at 25 degC: J. Res. Natl. Bur. Stand. 1967, 71A, 379.
PKA_BENZOIC_ACID = 4.210
# pKa of the anilinium ion at 25 degC: NIST SRD 46 as tabulated in Harris, Quantitative
# Chemical Analysis (appendix of acid dissociation constants).
PKA_ANILINIUM = 4.601

# IUPAC Gold Book, "fraction extracted" (F02503): E_n = 1 - (rD + 1)^-n. Worked check with
# D = 2, V_aq = 100 mL, V_org = 50 mL per portion (r = 0.5): remaining 0.5, 0.25, 0.125, 0.0625
# after 1-4 portions; 150 mL as ten 15 mL portions leaves 0.0725 (= 1.3^-10 = 0.07254);
# the split limit is e^-3 = 0.0498.
WORKED_D = 2.0
WORKED_V_AQ = 100.0
WORKED_V_ORG = 50.0
WORKED_REMAINING = (0.5, 0.25, 0.125, 0.0625)
WORKED_TEN_WAY_REMAINING = 0.0725
WORKED_SPLIT_LIMIT = 0.0498
