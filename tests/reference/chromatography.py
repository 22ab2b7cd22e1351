"""Chromatographic system-suitability formulas and limits, each with its source.

"from memory" marks a value or formula recalled, not read from the source during this work.
The formulas were checked against the stored copy of the "Resolution (chromatography)" page of
Wikipedia (Rs = 2 (tR2 - tR1) / (wb1 + wb2), N = 16 (tR / Wb)^2), read during this work.
"""

# --- USP <621> Chromatography / Ph. Eur. 2.2.46 (from memory) ------------------------------
RS_HALF_HEIGHT_FACTOR = 1.18          # Rs = 1.18 (tR2 - tR1) / (w0.5,1 + w0.5,2)
N_HALF_HEIGHT_FACTOR = 5.54           # N = 5.54 (tR / w0.5)^2
N_BASE_FACTOR = 16                    # N = 16 (tR / Wb)^2 (also the Wikipedia page above)

# --- Worked check, by hand from the formulas above (every step written out) -------------------
# analyte tR = 6.20 min, neighbour tR = 5.40 min, marker tM = 1.00 min
#   k(analyte)   = (6.20 - 1.00) / 1.00 = 5.20
#   k(neighbour) = (5.40 - 1.00) / 1.00 = 4.40
#   alpha        = 5.20 / 4.40 = 1.1818...
# base widths 0.32 and 0.28 min: Rs = 2 x 0.80 / 0.60 = 2.6667
# half-height widths 0.19 and 0.17 min: Rs = 1.18 x 0.80 / 0.36 = 2.6222
# plate number from w0.5 = 0.19: N = 5.54 x (6.20 / 0.19)^2 = 5.54 x 1064.82 = 5899.1
# tailing with W0.05 = 0.44, f = 0.16: T = 0.44 / 0.32 = 1.375
WORKED = dict(tR=6.20, tR_neighbour=5.40, tM=1.00, width_base=0.32, width_base_neighbour=0.28,
              width_half=0.19, width_half_neighbour=0.17, width_5pct=0.44, front_5pct=0.16)
WORKED_K = 5.20
WORKED_K_NEIGHBOUR = 4.40
WORKED_ALPHA = 1.1818
WORKED_RS_BASE = 2.6667
WORKED_RS_HALF = 2.6222
WORKED_N_HALF = 5899.1
WORKED_TAILING = 1.375

# --- A Gaussian peak (standard results of the plate theory, from memory) ----------------------
# width at half height 2 sqrt(2 ln 2) sigma = 2.3548 sigma; tangent base width 4 sigma;
# N = (tR / sigma)^2; a symmetric peak has tailing factor 1.
GAUSS_HALF_WIDTH_PER_SIGMA = 2.3548
GAUSS_BASE_WIDTH_PER_SIGMA = 4.0

# --- Limits (common practice; the pharmacopoeias leave them to the monograph or method) -------
# Rs >= 2.0 from the nearest neighbour, tailing <= 2.0, RSD of 5 (or 6) replicate injections
# <= 2.0 % (USP <621> states RSD <= 2.0 % for five replicates when the monograph asks 2.0 %;
# from memory).
DEFAULT_RS_MIN = 2.0
DEFAULT_TAILING_MAX = 2.0
DEFAULT_INJECTION_RSD_MAX_PCT = 2.0
DEFAULT_INJECTIONS_MIN = 5
