"""Published values for calibration lines and their acceptance, each with its source.

"from memory" marks a value recalled, not read from the source during this work.
"""

# --- Miller & Miller, Statistics and Chemometrics for Analytical Chemistry (Pearson), ch. 5 ----
# (from memory) The worked fluorescence calibration: standards 0-12 pg/mL, one reading each.
MILLER_X = (0.0, 2.0, 4.0, 6.0, 8.0, 10.0, 12.0)
MILLER_Y = (2.1, 5.0, 9.0, 12.6, 17.3, 21.0, 24.7)
# Line y = a + b x, correlation coefficient r, s_(y/x), s_a, s_b, as printed (from memory).
MILLER_SLOPE = 1.93
MILLER_INTERCEPT = 1.52
MILLER_R = 0.9989
MILLER_S_YX = 0.4329
MILLER_S_A = 0.2950
MILLER_S_B = 0.0409
# 95 % limits use t = 2.57 (5 degrees of freedom): intercept 1.52 +/- 0.76 (from memory).
MILLER_T_5DF = 2.57
MILLER_INTERCEPT_HALF_WIDTH = 0.76
# Inverse prediction with one reading (m = 1): y0 -> (x0, s_x0), pg/mL (from memory).
MILLER_INVERSE = {2.9: (0.72, 0.26), 13.5: (6.21, 0.24), 23.0: (11.13, 0.26)}

# --- ICH M10, Bioanalytical method validation and study sample analysis (2022) --------------
# Calibration curve acceptance (from memory): back-calculated concentrations of the calibration
# standards within +/-15 % of nominal, +/-20 % at the LLOQ; at least 75 % of the standards,
# with a minimum of six concentration levels, meet these criteria.
ICH_M10_LIMIT_PCT = 15.0
ICH_M10_LLOQ_LIMIT_PCT = 20.0
ICH_M10_MIN_FRACTION = 0.75
ICH_M10_MIN_LEVELS = 6
