"""Published values for method recovery, matrix effect and precision, each with its source.

"from memory" marks a value recalled, not read from the source during this work.
"""

# --- USP <1010> Analytical Data - Interpretation and Treatment (USP 29), precision example ----
# Read from a stored public copy (pharmacopeia.cn, usp29nf24s0_c1010). Five runs of three
# replicates (the data are USP1010_RUNS in acceptance_refs.py); the analysis of variance:
USP1010_SS_BETWEEN = 14.200       # 4 df
USP1010_DF_BETWEEN = 4
USP1010_MS_BETWEEN = 3.550
USP1010_SS_WITHIN = 1.018         # 10 df
USP1010_MS_WITHIN = 0.102
USP1010_F = 34.80
USP1010_SS_TOTAL = 15.217
USP1010_MEAN = 100.96
# "Precision of the mean corresponding to various test plans": variance of the mean of one
# run of one replicate (= between-run + within-run variance, i.e. s_I^2 of ISO 5725-3) and of
# one run of three replicates (between-run + within-run / 3).
USP1010_VAR_1RUN_1REP = 1.251
USP1010_VAR_1RUN_3REP = 1.183
USP1010_VAR_2RUN_1REP = 0.625

# --- Matrix effect limits ----------------------------------------------------------------------
# EMA Guideline on bioanalytical method validation (2011), after Crystal City III: the CV of the
# IS-normalised matrix factor from 6 lots of matrix should not be greater than 15 %.
# Read as quoted in a public discussion of ICH M10 (forum.bebac.at, entries 23108-23109),
# which also quotes ICH M10 (2022): "at least 3 replicates of low and high QCs, each prepared
# using matrix from at least 6 different sources/lots ... accuracy within +/-15 % of the
# nominal concentration and the precision (%CV) should not be greater than 15 %".
MF_CV_MAX_PCT = 15.0
MF_MIN_LOTS = 6
ICH_M10_LOT_ACCURACY_PCT = 15.0
ICH_M10_LOT_CV_MAX_PCT = 15.0
ICH_M10_QC_REPLICATES_MIN = 3
