"""Published values for the acceptance statistics, each with its source.

"from memory" marks a value recalled, not read from the source during this work; every other
value was read from the source (or a stored public copy of it) named beside it.
"""

# --- Grubbs' test, two-sided critical values for one outlier --------------------------------
# Read from a stored public copy of D. Harvey, Analytical Chemistry 2.1, Appendix 7 "Critical
# Values for Grubb's Test" (chem.libretexts.org), G(alpha, n). ISO 5725-2:1994 Table 5, the
# table the screens name, was not read during this work: that it lists the same values is
# from memory.
GRUBBS_N10 = {0.05: 2.290, 0.01: 2.482}
# Further rows of the same table: n -> (5 % value, 1 % value).
GRUBBS_ROWS = {
    5: (1.715, 1.764),
    6: (1.887, 1.973),
    12: (2.412, 2.636),
}
# n = 7 from memory: the copy above prints 2.202 at 5 %, above its own 1 % value (a misprint).
GRUBBS_ROWS_FROM_MEMORY = {7: (2.020, 2.139)}

# --- USP General Chapter <1010> Analytical Data - Interpretation and Treatment (USP 29) ------
# Read from a stored public copy (pharmacopeia.cn, usp29nf24s0_c1010).
# Outlier example: ten results; mean 99.54, SD 1.369; the normalized deviation of 95.7 is
# -2.805. With 95.7 set aside the nine remaining have mean 99.95, SD 0.245, and the most
# extreme normalized deviation is that of 99.5, -1.905.
USP1010_OUTLIER_DATA = (100.3, 100.2, 100.1, 100.0, 100.0, 100.0, 99.9, 99.7, 99.5, 95.7)
USP1010_OUTLIER_MEAN = 99.54
USP1010_OUTLIER_SD = 1.369
USP1010_OUTLIER_NORMALIZED = -2.805
USP1010_NINE_NORMALIZED_MIN = -1.905
# Precision example: five runs of three replicates, each run's RSD (%), and the within-runs
# line of the analysis of variance: SS 1.018 on 10 df.
USP1010_RUNS = (
    (100.70, 101.05, 101.15),
    (99.46, 99.37, 99.59),
    (99.96, 100.17, 101.01),
    (101.80, 102.16, 102.44),
    (101.91, 102.00, 101.67),
)
USP1010_RUN_RSD_PCT = (0.234, 0.111, 0.554, 0.314, 0.167)
USP1010_WITHIN_SS = 1.018
USP1010_WITHIN_DF = 10

# --- Montgomery & Runger, Applied Statistics and Probability for Engineers, Example S11-1 ----
# Read from a stored public copy of the book's supplemental section S11 (issuhub.com).
# Data: x -> replicate y values.
MR_S11_1_DATA = {
    1.0: (2.3, 1.8),
    2.0: (2.8,),
    3.3: (1.8, 3.7),
    4.0: (2.6, 2.6, 2.2),
    5.0: (2.0,),
    5.6: (3.5, 2.8, 2.1),
    6.0: (3.4, 3.2),
    6.5: (3.4,),
    6.9: (5.0,),
}
MR_S11_1_INTERCEPT = 1.697  # fitted line y = 1.697 + 0.259 x
MR_S11_1_SLOPE = 0.259
MR_S11_1_SS_RESIDUAL = 7.3372  # 14 df (Table S11-1)
# The book's SS_PE is the sum of its per-level terms each rounded to 4 decimals
# (0.1250 + 1.8050 + 0.1066 + 0.9800 + 0.0200); the unrounded sum is 3.03667.
MR_S11_1_SS_PE = 3.0366
MR_S11_1_SS_LOF = 4.3005
MR_S11_1_DF_PE = 7
MR_S11_1_DF_LOF = 7
MR_S11_1_F = 1.42
# The book's P-value is that of the rounded f0 = 1.42; the unrounded F (1.416) gives 0.3288.
MR_S11_1_P = 0.3276

# --- AOAC Official Methods of Analysis (2012), Appendix F ------------------------------------
# Read from stored public copies of Appendix F (AOAC INTERNATIONAL, pages 9 and 13-14).
# Table A5, "Expected recovery as a function of analyte concentration":
# (mass fraction, unit label, mean recovery lo %, hi %).
AOAC_A5 = (
    (1.0, "100 %", 98.0, 102.0),
    (1e-1, "10 %", 98.0, 102.0),
    (1e-2, "1 %", 97.0, 103.0),
    (1e-3, "0.1 %", 95.0, 105.0),
    (1e-4, "100 ppm", 90.0, 107.0),
    (1e-5, "10 ppm", 80.0, 110.0),
    (1e-6, "1 ppm", 80.0, 110.0),
    (1e-7, "100 ppb", 80.0, 110.0),
    (1e-8, "10 ppb", 60.0, 115.0),
    (1e-9, "1 ppb", 40.0, 120.0),
)
# Annex D Table D1, "Predicted relative standard deviations": mass fraction -> PRSD(R) in %
# (whole numbers), from PRSD(R) = 2 C^-0.15 (Annex D 1.7).
AOAC_D1_PRSD_R = {1.0: 2, 1e-2: 4, 1e-4: 8, 1e-6: 16, 1e-8: 32, 1e-9: 45}
# Annex D 2.2.1: within-laboratory repeatability targets (Table D2) at 1/2 of PRSD(R).
AOAC_REPEATABILITY_FRACTION_OF_PRSD_R = 0.5
# Annex D 1.8: HorRat(r) = RSD(r) / PRSD(R) (the denominator is always PRSD(R)).
# Annex D 2.2.2: acceptable HorRat(r) 0.3-1.3; 2.1: HorRat(R) limits 0.5-2.0.
AOAC_HORRAT_R_LIMITS = (0.5, 2.0)
AOAC_HORRAT_r_LIMITS = (0.3, 1.3)

# --- OECD Test Guideline 107 (27 July 1995), shake-flask method -------------------------------
# Read from the guideline's published summary (stored copy of the OECD iLibrary page): "The six
# log Pow values should fall within a range of +/- 0.3 units."
OECD_107_HALF_WIDTH_LOG = 0.3
