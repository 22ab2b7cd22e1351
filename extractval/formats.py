"""How numbers are written for people: the one place of the dossier's number styles.

The register, the pages, the plots, the CLI summary and the engine's own sentences (verdict
details, a procedure's reading) all write numbers through :func:`fmt_number` or
:func:`fmt_pct`, so a number reads the same wherever it appears. Nothing here computes a
result; a style only fixes the digits.

The rules that are not plain digit counts (the project's conventions, not a standard):

* **Recoveries near 100 %** (style ``pct``): one decimal below 99.85 %; two decimals from
  99.85 % (what one decimal would show as 99.9) to 99.99 %, so that the two ends of an interval
  read alike ("99.90 to 99.91"); from 99.99 % up to 100 % the text "> 99.99". The fraction
  left in the water (style ``frac``) is the precise figure there: 2.5e-05 says what "99.9975 %"
  would, without digits no recovery assay can check. Above 100 % (a measured recovery, the
  range of one future run) one decimal again.
* **Tiny fractions** (style ``frac``): below :data:`FRACTION_FLOOR` (one part per million) the
  text "< 1e-06". The model would give 5.5e-84 after enough portions, but no run of a study
  measures anything near that; the register keeps the identifier and shows the bound.
* **Significant digits are kept** (styles ``se`` and ``frac``, numbers estimated from data):
  a standard error of 0.04999 is written "0.050", not "0.05", which would claim one digit
  only; a point left bare by that rule ("12.") is dropped. Limits and set values (style
  ``g``) are written as they were set ("95", not "95.00").
* **No negative zero**: a value that rounds to zero is written without a sign ("0.00", never
  "-0.00").
"""

from __future__ import annotations

import re

#: fractions between which a one-phase run gives a log D worth plotting (the plot and the
#: study page's caption both say it)
ONE_PHASE_PLOT_RANGE = (0.02, 0.98)

#: the same outcomes in words, sentence case, as pages and the CLI show them
OUTCOME_WORDS = {"pass": "Met", "fail": "Not met", "note": "To investigate",
                 "not judged": "Not judged"}

#: recoveries from here up to 100 % are written "> 99.99" (two decimals below it)
RECOVERY_CAP_PCT = 99.99
#: recoveries from here (one decimal would show 99.9) are written with two decimals
RECOVERY_TWO_DECIMALS_PCT = 99.85
#: fractions (left in the water) below this are written "< 1e-06"
FRACTION_FLOOR = 1e-6

#: digits of each plain number style (format specifications)
_FORMAT_SPECS = {"log": ".3f", "pH": ".2f", "r": ".3f", "se": "#.2g", "f2": ".2f", "mL": "g",
                 "g": ".4g", "r4": ".4f", "f1": ".1f", "g6": ".6g",
                 "f3": ".3f"}
#: the styles :func:`fmt_number` knows
STYLES = ("int", "log", "pH", "r", "se", "frac", "pct", "f2", "rel", "mL", "g", "r4", "f1",
          "g6", "f3")
_NEGATIVE_ZERO = re.compile(r"-(?=0*\.?0*(e[+-]?\d+)?(\s?%)?$)")


def _unsigned_zero(text: str) -> str:
    """ "-0.00" -> "0.00": a rounded zero carries no sign.

    >>> _unsigned_zero("-0.00"), _unsigned_zero("-0.01"), _unsigned_zero("-0 %")
    ('0.00', '-0.01', '0 %')
    """
    return _NEGATIVE_ZERO.sub("", text) if text.startswith("-") else text


def _no_bare_point(text: str) -> str:
    """ "12." -> "12": the point the alternate form ("#") leaves after a whole number.

    >>> _no_bare_point(format(0.04999, "#.2g")), _no_bare_point(format(12.4, "#.2g"))
    ('0.050', '12')
    >>> _no_bare_point(format(1.2e-7, "#.2g")), _no_bare_point(format(0.7, "#.4g"))
    ('1.2e-07', '0.7000')
    """
    return text[:-1] if text.endswith(".") else text


def fmt_pct(x: float | None) -> str:
    """A recovery (or other percentage) as people read it, without the unit.

    >>> fmt_pct(98.76), fmt_pct(99.95), fmt_pct(99.987), fmt_pct(99.99997542), fmt_pct(None)
    ('98.8', '99.95', '99.99', '> 99.99', 'open')
    >>> fmt_pct(99.84), fmt_pct(99.8996)
    ('99.8', '99.90')
    >>> fmt_pct(100.0), fmt_pct(104.04), fmt_pct(-0.01)
    ('> 99.99', '104.0', '0.0')
    """
    if x is None:
        return "open"
    if RECOVERY_CAP_PCT <= x <= 100.0:
        return f"> {RECOVERY_CAP_PCT:g}"
    if RECOVERY_TWO_DECIMALS_PCT <= x < RECOVERY_CAP_PCT:
        return f"{x:.2f}"         # at most "99.99": rounding cannot reach 100 here
    return _unsigned_zero(f"{x:.1f}")


def fmt_fraction(x: float | None) -> str:
    """A fraction (left in the water) with three significant digits, or the floor.

    >>> fmt_fraction(0.04281604923), fmt_fraction(2.517609524e-07), fmt_fraction(5.5e-84)
    ('0.0428', '< 1e-06', '< 1e-06')
    >>> fmt_fraction(1.2e-5), fmt_fraction(0.0), fmt_fraction(0.0210)
    ('1.20e-05', '< 1e-06', '0.0210')
    """
    if x is None:
        return "open"
    if 0.0 <= x < FRACTION_FLOOR:          # 0 too: a float underflow, never a true zero
        return f"< {FRACTION_FLOOR:.0e}"
    return _unsigned_zero(format(x, "#.3g"))


def fmt_number(value, style: str) -> str:
    """A reported number as people read it; the style fixes the digits, nothing is computed.

    >>> fmt_number(2.599229, "log"), fmt_number(0.0076763, "se"), fmt_number(None, "log")
    ('2.599', '0.0077', 'open')
    >>> fmt_number(0.04956, "rel"), fmt_number(2.4578e-05, "frac"), fmt_number(99.9999754, "pct")
    ('4.96 %', '2.46e-05', '> 99.99')
    >>> fmt_number(-0.001, "f2"), fmt_number(-0.0004, "log")
    ('0.00', '0.000')
    """
    if value is None:
        return "open"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if style == "int":
        return f"{int(value)}"
    if style == "pct":                      # a percentage; the unit is written beside it
        return fmt_pct(value)
    if style == "frac":
        return fmt_fraction(value)
    if style == "rel":                      # a relative SD held as a fraction, shown in percent
        return _unsigned_zero(format(value, ".2%").replace("%", " %"))
    if style in _FORMAT_SPECS:
        return _unsigned_zero(_no_bare_point(format(value, _FORMAT_SPECS[style])))
    raise ValueError(f"unknown number style {style!r}")


def is_bound(text: str) -> bool:
    """Whether a formatted number is a bound ("> 99.99", "< 1e-06") rather than a value."""
    return text.startswith(("> ", "< "))


def in_words(text: str) -> str:
    """A formatted bound as words for a sentence ("> 99.99" -> "more than 99.99").

    >>> in_words("> 99.99"), in_words("< 1e-06"), in_words("95.7")
    ('more than 99.99', 'less than 1e-06', '95.7')
    """
    if text.startswith("> "):
        return "more than " + text[2:]
    if text.startswith("< "):
        return "less than " + text[2:]
    return text


def span_words(lo: str, hi: str, unit: str = "") -> str:
    """An interval from its two formatted ends; one bound for both ends is said once.

    >>> span_words("95.5", "95.9", " %"), span_words("> 99.99", "> 99.99", " %")
    ('95.5 to 95.9 %', 'entirely above 99.99 %')
    >>> span_words("< 1e-06", "< 1e-06"), span_words("99.96", "> 99.99", " %")
    ('entirely below 1e-06', '99.96 to above 99.99 %')
    """
    if lo == hi and lo.startswith(("> ", "< ")):
        side = "above" if lo.startswith(">") else "below"
        return f"entirely {side} {lo[2:]}{unit}"

    def end(text: str) -> str:
        if text.startswith(("> ", "< ")):
            return ("above " if text.startswith(">") else "below ") + text[2:]
        return text

    return f"{end(lo)} to {end(hi)}{unit}"
