"""The number register: a stable identifier, anchor and citation line for every reported number.

An identifier is ``<study-id>/<quantity>[/<statistic>]``, e.g. ``HPA-2026-014/logK``,
``HPA-2026-014/logK/ci95_lo``, ``HPA-2026-014/P1/recovery_pct/ci95_hi`` or
``HPA-2026-014/P1/recovery_pct/pi95_lo`` (the prediction interval of one future run). It is
built from names only (the study id, the parameter or procedure id, the quantity), never from a
position, so it does not change when the dossier is rebuilt or other studies are added.

Each number points into the study's ``StudyReport.to_dict()`` with a JSON pointer
(:func:`resolve`); the register copies the value found there and computes nothing.
"""

from __future__ import annotations

import csv
import io
import json
import re
from dataclasses import dataclass, field

from ..formats import STYLES, fmt_number, is_bound, span_words  # noqa: F401  (one place)

#: characters kept in identifiers and anchors; anything else becomes "_"
_SAFE = re.compile(r"[^A-Za-z0-9._-]")


def safe_name(text: str) -> str:
    """A name fit for an identifier segment and an HTML id (study and procedure ids)."""
    return _SAFE.sub("_", str(text)) or "_"


def resolve(d: dict, pointer: str):
    """The value at a JSON pointer (RFC 6901) in a study dict.

    >>> resolve({"parameters": {"logK": {"ci95": [1.5, 2.5]}}}, "/parameters/logK/ci95/1")
    2.5
    """
    node = d
    for part in pointer.lstrip("/").split("/") if pointer not in ("", "/") else []:
        part = part.replace("~1", "/").replace("~0", "~")
        node = node[int(part)] if isinstance(node, list) else node[part]
    return node


def pointer(*parts) -> str:
    """A JSON pointer from path parts (keys or list indices)."""
    return "".join("/" + str(p).replace("~", "~0").replace("/", "~1") for p in parts)


# -- what each quantity is ----------------------------------------------------------------------
_PARAMETER_TEXT = {
    "logK": "log K, partition coefficient of the neutral form (log10)",
    "pKa": "pKa",
    "pKa1": "pKa1 (first acid dissociation constant)",
    "pKa2": "pKa2 (second acid dissociation constant)",
    "logK_ion": "log K of the ion pair (log10)",
}
_STAT_TEXT = {
    "value": "", "se": "standard error of", "ci95_lo": "lower end of the 95 % interval of",
    "ci95_hi": "upper end of the 95 % interval of",
    "pi95_lo": "lower end of the 95 % prediction interval (one future run) of",
    "pi95_hi": "upper end of the 95 % prediction interval (one future run) of",
}
#: how the value judged by each criterion is written (a recovery near 100 % as "> 99.99")
#: digits of each criterion's value: an RSD or CV estimated from a few dozen values is known
#: to about a fifth of itself, so two significant digits; recoveries and mass balances to 0.1 %.
CRITERION_STYLES = {"recovery_pct": "pct", "aoac_recovery_pct": "pct", "purity_pct": "pct",
                    "horrat_r": "f2",
                    "ratio_agreement_log": "log", "max_rsd_pct": "se", "mass_balance_pct": "f1",
                    "matrix_factor_cv_pct": "se", "method_recovery_pct": "f1",
                    "method_recovery_rsd_pct": "se", "repeatability_rsd_pct": "se",
                    "intermediate_rsd_pct": "se", "suitability_resolution_min": "f2",
                    "suitability_tailing_max": "f2", "suitability_injection_rsd_max_pct": "se",
                    "suitability_retention_factor_min": "f2"}


def study_status(d: dict) -> tuple[str, str]:
    """(css class, words) for a study's state: the engine's status and its words
    (``status``, ``status_text``), or why there are none."""
    if d.get("problems"):
        return "bad", "not fitted"
    status, text = d.get("status"), d.get("status_text")
    if text and status in ("pass", "fail", "not judged"):
        css = {"pass": "good", "fail": "bad", "not judged": "warn"}[status]
        return css, text
    warn = len(d.get("warnings", []))
    if warn:
        return "warn", f"fitted, {warn} warning{'s' if warn != 1 else ''} to read"
    return "good", "fitted"


class _Labels(dict):
    """Criterion labels; a per-level criterion ``name[level]`` (method.py) reads as the
    label of ``name`` followed by ", level <level>"."""

    def __missing__(self, key: str) -> str:
        name, sep, level = key.partition("[")
        if sep and key.endswith("]") and name in self:
            return f"{self[name]}, level {level[:-1]}"
        raise KeyError(key)

    def get(self, key, default=None):
        try:
            return self[key]
        except KeyError:
            return default


CRITERION_LABELS = _Labels({
    "recovery_pct": "Recovery at the worst case inside the tolerances (%)",
    "workup_recovery_pct": "Recovery into the work-up's product, as written (%)",
    "purity_pct": "Purity of the product (%)",
    "max_rsd_pct": "Repeatability, pooled RSD (%)",
    "mass_balance_pct": "Mass balance of every run in the fit (%)",
    "ratio_agreement_log": "Agreement of log D between volume ratios",
    "lack_of_fit": "Lack of fit (p value)",
    "aoac_recovery_pct": "AOAC recovery range for the analyte level (%)",
    "horrat_r": "HorRat(r), repeatability against the Horwitz value",
    "matrix_factor_cv_pct": "CV of the matrix factor over the matrix lots (%)",
    "method_recovery_pct": "Absolute recovery of the method at a level (%)",
    "method_recovery_rsd_pct": "RSD of the method's recovery at a level (%)",
    "repeatability_rsd_pct": "Repeatability RSD, ISO 5725-3 (%)",
    "intermediate_rsd_pct": "Intermediate-precision RSD, ISO 5725-3 (%)",
    "suitability_resolution_min": "Resolution from the nearest neighbour, smallest",
    "suitability_tailing_max": "Tailing factor, largest",
    "suitability_injection_rsd_max_pct": "RSD of replicate injections (%)",
    "suitability_plates_min": "Plate number, smallest",
    "suitability_retention_factor_min": "Retention factor, smallest",
})


def criterion_style(criterion: str) -> str:
    return CRITERION_STYLES.get(criterion.partition("[")[0], "g")


def parameter_text(name: str) -> str:
    return _PARAMETER_TEXT.get(name, name)


def _style_of_parameter(name: str) -> str:
    return "log"


@dataclass(frozen=True)
class Number:
    """One reported number with its identifier and where in the study dict it sits."""

    study: str
    quantity: str            # e.g. "logK", "P1/recovery_pct", "P1/remaining_after/2"
    statistic: str           # "value", "se", "ci95_lo", "ci95_hi", "pi95_lo", "pi95_hi"
    value: float | int | None
    style: str
    source: str              # JSON pointer into the study dict
    unit: str = ""

    @property
    def identifier(self) -> str:
        tail = "" if self.statistic == "value" else "/" + self.statistic
        return f"{safe_name(self.study)}/{self.quantity}{tail}"

    @property
    def anchor(self) -> str:
        return self.identifier

    @property
    def display(self) -> str:
        """The number as the page shows it, with "%" where the quantity is a percentage."""
        text = fmt_number(self.value, self.style)
        return f"{text} %" if self.unit == "%" and self.value is not None else text


@dataclass(frozen=True)
class Quantity:
    """A reported quantity: its value and, where there are, SE and interval ends."""

    study: str
    name: str                # identifier tail, e.g. "P1/recovery_pct"
    description: str
    unit: str
    method: str | None
    numbers: tuple[Number, ...] = field(default_factory=tuple)
    pi_method: str | None = None     # how the prediction interval (pi95) was made, if any

    @property
    def identifier(self) -> str:
        return f"{safe_name(self.study)}/{self.name}"

    def get(self, statistic: str) -> Number | None:
        for n in self.numbers:
            if n.statistic == statistic:
                return n
        return None

    def interval_text(self, kind: str = "ci95") -> str:
        """"95 % interval a to b %" (kind ci95) or the prediction interval (kind pi95)."""
        lo, hi = self.get(f"{kind}_lo"), self.get(f"{kind}_hi")
        if lo is None or hi is None:
            return ""
        unit = " %" if self.unit == "%" else ""
        shown = span_words(fmt_number(lo.value, lo.style), fmt_number(hi.value, hi.style), unit)
        name = "95 % interval" if kind == "ci95" else "95 % prediction interval of one run"
        return f"{name} {shown}"

    def citation(self, number: Number, dossier_version: str, software: str,
                 inputs_key: str = "") -> str:
        """A copy-ready line: identifier, value, interval, unit, study (with its inputs key,
        which changes only when the study's own files change), dossier version."""
        shown = number.display
        head = f"{number.identifier} {'' if is_bound(shown) else '= '}{shown}"
        if number.statistic == "value":
            extra = []
            se = self.get("se")
            if se is not None:
                extra.append(f"SE {se.display}")
            iv = self.interval_text()
            if iv:
                extra.append(iv + (f", {self.method}" if self.method else ""))
            pi = self.interval_text("pi95")
            if pi:
                extra.append(pi + (f", {self.pi_method}" if self.pi_method else ""))
            what = self.description + (f" [{self.unit}]" if self.unit not in ("", "%") else "")
            body = f"{what}" + (f"; {'; '.join(extra)}" if extra else "")
        else:
            body = f"{_STAT_TEXT[number.statistic]} {self.description}".strip()
            if self.unit not in ("", "%"):
                body += f" [{self.unit}]"
        study = f"Study {self.study}" + (f" (inputs {inputs_key})" if inputs_key else "")
        return (f"{head} ({body}). {study}, extraction validation dossier "
                f"{dossier_version}, {software}.")


def _q(study, name, description, unit, method, base, stats, style, d) -> Quantity | None:
    """A quantity from ``base`` (pointer parts to an entry with value/se/ci95)."""
    entry = _get(d, base)
    if entry is None:
        return None
    nums = []
    for stat in stats:
        if stat == "value":
            parts = base + ["value"] if isinstance(entry, dict) else base
        elif stat == "se":
            parts = base + ["se"]
        else:                                   # ci95_lo, ci95_hi, pi95_lo, pi95_hi
            parts = base + [stat[:4], 0 if stat.endswith("_lo") else 1]
        p = pointer(*parts)
        try:
            value = resolve(d, p)
        except (KeyError, IndexError, TypeError):
            continue
        nums.append(Number(study, name, stat, value, "se" if stat == "se" else style, p, unit))
    if not nums:
        return None
    pi_method = entry.get("pi95_method") if isinstance(entry, dict) else None
    return Quantity(study, name, description, unit, method, tuple(nums), pi_method)


def _get(d, parts):
    try:
        return resolve(d, pointer(*parts))
    except (KeyError, IndexError, TypeError):
        return None


VALUE_CI = ("value", "ci95_lo", "ci95_hi")


def study_register(d: dict) -> list[Quantity]:
    """Every reported number of one study dict, grouped by quantity, in page order."""
    sid = d["study"]
    out: list[Quantity | None] = []
    for name, p in d.get("parameters", {}).items():
        out.append(_q(sid, safe_name(name), parameter_text(name), "", p.get("ci95_method"),
                      ["parameters", name], ("value", "se", "ci95_lo", "ci95_hi"),
                      _style_of_parameter(name), d))
    st = d.get("statistics")
    if st:
        out.append(_q(sid, "residual_sd", "residual SD, relative SD of one measured amount",
                      "", None, ["statistics", "residual_sd"], ("value",), "rel", d))
        out.append(_q(sid, "dof", "degrees of freedom of the fit", "", None,
                      ["statistics", "dof"], ("value",), "int", d))
        out.append(_q(sid, "n_fitted", "number of runs in the fit", "", None,
                      ["statistics", "n_fitted"], ("value",), "int", d))
    corr = d.get("correlation")
    if corr:
        names = corr["parameters"]
        for i in range(len(names)):
            for j in range(i + 1, len(names)):
                out.append(_q(sid, f"correlation/{safe_name(names[i])}/{safe_name(names[j])}",
                              f"correlation of {names[i]} and {names[j]}", "", None,
                              ["correlation", "matrix", i, j], ("value",), "r", d))
    rep = d.get("repeatability") or {}
    if rep.get("rsd_pct") is not None:
        out.append(_q(sid, "repeatability/rsd_pct", "pooled RSD of replicate runs", "%", None,
                      ["repeatability", "rsd_pct"], ("value",), "se", d))
    lof = d.get("lack_of_fit") or {}
    if lof.get("F") is not None:
        out.append(_q(sid, "lack_of_fit/F", "lack-of-fit F statistic (pure error from the "
                      "replicates)", "", None, ["lack_of_fit", "F"], ("value",), "g", d))
        out.append(_q(sid, "lack_of_fit/p_value", "p value of the lack-of-fit test", "", None,
                      ["lack_of_fit", "p_value"], ("value",), "g", d))
    out.extend(_verdict_register(sid, "criteria", d.get("verdicts") or [], ["verdicts"], d))
    for k, pr in enumerate(d.get("procedures", [])):
        out.extend(_procedure_register(sid, k, pr, d))
    out.extend(_selectivity_register(sid, d))
    side = (d.get("outlier_screen") or {}).get("without_flagged") or {}
    for name, p in (side.get("parameters") or {}).items():
        out.append(_q(sid, f"without_flagged/{safe_name(name)}",
                      f"{parameter_text(name)}, fitted without the flagged runs", "",
                      p.get("ci95_method"),
                      ["outlier_screen", "without_flagged", "parameters", name],
                      ("value", "se", "ci95_lo", "ci95_hi"), "log", d))
    for k, pr in enumerate(side.get("procedures") or []):
        out.append(_q(sid, f"without_flagged/{safe_name(pr['id'])}/recovery_pct",
                      f"predicted recovery of procedure {pr['id']}, fitted without the flagged "
                      "runs", "%", pr["recovery_pct"].get("ci95_method"),
                      ["outlier_screen", "without_flagged", "procedures", k, "recovery_pct"],
                      VALUE_CI, "pct", d))
    out.extend(_calibration_register(sid, d))
    out.extend(_suitability_register(sid, d))
    out.extend(_method_register(sid, d))
    out.extend(_next_runs_register(sid, d))
    out.extend(_solvent_register(sid, d))
    return [q for q in out if q is not None]


def _solvent_register(sid: str, d: dict) -> list[Quantity | None]:
    """The ICH Q3C(R8) class (and class 2 limit) of each solvent of the table that the study's
    organic phase names: ``<study>/solvent/<name>/ich_q3c_class``, ``.../ich_q3c_limit_ppm``."""
    from ..solvent_choice import solvent_quantity

    out: list[Quantity | None] = []
    for i, s in enumerate((d.get("solvent") or {}).get("solvents") or []):
        facts = s["facts"]
        base = ["solvent", "solvents", i, "facts"]
        if facts["ich_q3c_class"]["value"] is not None:
            out.append(_q(sid, solvent_quantity(s["name"], "ich_q3c_class"),
                          f"ICH Q3C(R8) residual-solvent class of {s['name']}", "",
                          facts["ich_q3c_class"]["source"], base + ["ich_q3c_class"],
                          ("value",), "int", d))
        if facts.get("ich_q3c_limit_ppm"):
            out.append(_q(sid, solvent_quantity(s["name"], "ich_q3c_limit_ppm"),
                          f"ICH Q3C(R8) concentration limit of {s['name']} (class 2)", "ppm",
                          facts["ich_q3c_limit_ppm"]["source"], base + ["ich_q3c_limit_ppm"],
                          ("value",), "g", d))
    return out


_CURVE_PARAMETER_TEXT = {"intercept": "y-intercept", "slope": "slope",
                         "quadratic": "quadratic coefficient"}


def _calibration_register(sid: str, d: dict) -> list[Quantity | None]:
    """Calibration numbers: ``calibration/<curve>/<quantity>`` and per standard
    ``calibration/<curve>/<standard>/...``; amounts read off a curve are
    ``quantitation/<run>/<phase>/...``."""
    cal = d.get("calibration")
    if not cal:
        return []
    out: list[Quantity | None] = []
    for k, c in enumerate(cal["curves"]):
        if "parameters" not in c:
            continue
        cid = f"calibration/{safe_name(c['id'])}"
        base = ["calibration", "curves", k]
        what = f"calibration {c['id']}"
        for name in c["parameters"]:
            out.append(_q(sid, f"{cid}/{name}", f"{_CURVE_PARAMETER_TEXT[name]} of {what} "
                          f"(weighting {c['weighting']})", "", "WLS, t interval",
                          base + ["parameters", name], ("value", "se", "ci95_lo", "ci95_hi"),
                          "g", d))
        for key, text, style in (
                ("correlation_coefficient", "correlation coefficient r of", "r4"),
                ("rss", "residual sum of squares (unweighted) of", "g"),
                ("residual_sd", "weighted residual SD of", "g")):
            out.append(_q(sid, f"{cid}/{key}", f"{text} {what}", "", "ICH Q2(R2) linearity",
                          base + ["linearity", key], ("value",), style, d))
        for key, text in (("standards_passing", "standards within the ICH M10 limits"),
                          ("levels_passing", "levels passing the ICH M10 limits")):
            out.append(_q(sid, f"{cid}/{key}", f"{text}, {what}", "", None,
                          base + ["acceptance", key], ("value",), "int", d))
        for i, st in enumerate(c["standards"]):
            sname = f"{cid}/{safe_name(st['standard'])}"
            out.append(_q(sid, f"{sname}/back_calculated", f"back-calculated level of "
                          f"standard {st['standard']}, {what}", "", None,
                          base + ["standards", i, "back_calculated"], ("value",), "g", d))
            out.append(_q(sid, f"{sname}/relative_error_pct", f"relative error of standard "
                          f"{st['standard']}, {what} ({st['verdict']})", "%", None,
                          base + ["standards", i, "relative_error_pct"], ("value",), "f1", d))
    unc = cal.get("uncertainty") or {}
    if unc.get("median_ratio") is not None:
        out.append(_q(sid, "calibration/uncertainty/median_ratio", "median ratio of the "
                      "calibration sd to the fit's sd of the runs' log10 values",
                      "", unc.get("rule"), ["calibration", "uncertainty", "median_ratio"],
                      ("value",), "f2", d))
    for i, r in enumerate(d.get("run_table", [])):
        for j, q in enumerate(r.get("quantitation") or []):
            if q.get("amount") is None:
                continue
            qname = f"quantitation/{safe_name(r['run'])}/{q['phase']}"
            for key, text in (("amount", "amount read off"), ("sd_total", "sd of the amount "
                                                             "read off")):
                out.append(_q(sid, f"{qname}/{key}", f"{text} calibration {q['curve']}, run "
                              f"{r['run']}, {q['phase']} phase", "", "inverse prediction, "
                              "delta method", ["run_table", i, "quantitation", j, key],
                              ("value",), "g", d))
    return out


#: suitability quantities: key, words, style (the page's digits)
_SUITABILITY_QUANTITIES = (
    ("resolution", "resolution from the nearest neighbour", "f2"),
    ("plate_number", "plate number", "int"),
    ("tailing_factor", "tailing factor", "f2"),
    ("retention_factor", "retention factor", "f2"),
    ("selectivity", "selectivity (alpha)", "f2"),
)


def _suitability_register(sid: str, d: dict) -> list[Quantity | None]:
    """System suitability: ``suitability/<sequence>/<quantity>`` (the worst injection's value,
    the one judged: Rs, N, T, and k when a limit is set),
    ``suitability/<sequence>/injection_rsd_pct`` and per injection
    ``suitability/<sequence>/<injection>/<quantity>``."""
    su = d.get("suitability")
    if not su:
        return []
    out: list[Quantity | None] = []
    method = "USP <621>, Ph. Eur. 2.2.46"
    for k, seq in enumerate(su["sequences"]):
        name = f"suitability/{safe_name(seq['sequence'])}"
        base = ["suitability", "sequences", k]
        what = f"sequence {seq['sequence']}"
        judged = ("resolution", "plate_number", "tailing_factor") + (
            ("retention_factor",) if (su["limits"].get("retention_factor_min") or {}).get(
                "value") is not None else ())
        for key, text, style in _SUITABILITY_QUANTITIES:
            if key not in judged:       # the page's sequence table shows the judged ones
                continue
            worst = "largest" if key == "tailing_factor" else "smallest"
            out.append(_q(sid, f"{name}/{key}", f"{worst} {text} over the injections of {what}",
                          "", method, base + ["worst", key], ("value",), style, d))
        out.append(_q(sid, f"{name}/injection_rsd_pct", f"RSD of the replicate standard "
                      f"injections of {what}", "%", None, base + ["injection_rsd_pct"],
                      ("value",), "f2", d))
        for i, inj in enumerate(seq["injections"]):
            label = safe_name(inj["injection"] or f"injection-{i + 1}")
            for key, text, style in _SUITABILITY_QUANTITIES:
                out.append(_q(sid, f"{name}/{label}/{key}", f"{text}, injection "
                              f"{inj['injection'] or i + 1} of {what}", "", method,
                              base + ["injections", i, key], ("value",), style, d))
            out.append(_q(sid, f"{name}/{label}/response", f"response of the standard, "
                          f"injection {inj['injection'] or i + 1} of {what}", "", None,
                          base + ["injections", i, "response"], ("value",), "g6", d))
    return out


def _qp(study, name, description, unit, method, d, value: list, ci: list | None = None,
        style: str = "g", se: list | None = None) -> Quantity | None:
    """A quantity whose value, SE and interval sit at any pointers (``ci`` names the pair)."""
    nums = []
    for stat, parts in (("value", value), ("se", se), ("ci95_lo", ci and ci + [0]),
                        ("ci95_hi", ci and ci + [1])):
        if parts is None:
            continue
        v = _get(d, parts)
        if v is None or isinstance(v, (dict, list)):
            continue
        nums.append(Number(study, name, stat, v, "se" if stat == "se" else style,
                           pointer(*parts), unit))
    if not nums or nums[0].statistic != "value":
        return None
    return Quantity(study, name, description, unit, method, tuple(nums))


def _method_register(sid: str, d: dict) -> list[Quantity | None]:
    """Method recovery (``method/recovery/<level>``, per lot ``.../<lot>``), matrix factor
    (``method/matrix_factor/<level>``, ``.../<lot>``, ``method/matrix_factor/lots/<lot>``)
    and precision components (``precision/<level>/s_r`` ...)."""
    m = d.get("method_recovery")
    if not m:
        return []
    out: list[Quantity | None] = []
    rq = "ratio of means, delta method, t interval"
    for level, r in m["recovery"].items():
        if "value" not in r:
            continue
        base, name = ["method_recovery", "recovery", level], f"method/recovery/{safe_name(level)}"
        out.append(_qp(sid, name, f"absolute recovery (pre / post) at level {level}", "%", rq,
                       d, base + ["value"], base + ["ci95"], "f1", base + ["se"]))
        out.append(_qp(sid, f"{name}/rsd_pct", f"RSD of the runs' recoveries at level {level}",
                       "%", None, d, base + ["rsd_pct"], style="f1"))
        for lot in r.get("lots", {}):
            out.append(_qp(sid, f"{name}/{safe_name(lot)}", f"absolute recovery at level "
                           f"{level} in matrix lot {lot}", "%", rq, d,
                           base + ["lots", lot, "value"], base + ["lots", lot, "ci95"], "f1"))
    if m.get("recovery_overall"):
        base = ["method_recovery", "recovery_overall"]
        out.append(_qp(sid, "method/recovery/overall", "mean of the runs' absolute recoveries "
                       "over all levels", "%", "t interval of the mean", d, base + ["mean"],
                       base + ["ci95"], "f1"))
    if m.get("recovery_consistency"):
        out.append(_qp(sid, "method/recovery/consistency_p", "p value of the F test of equal "
                       "recovery at all levels", "", "one-way ANOVA", d,
                       ["method_recovery", "recovery_consistency", "p_value"], style="g"))
    word = "IS-normalised matrix factor" if m.get("is_normalised") else "matrix factor"
    for level, mf in m["matrix_factor"].items():
        if "lots" not in mf:
            continue
        base, name = (["method_recovery", "matrix_factor", level],
                      f"method/matrix_factor/{safe_name(level)}")
        out.append(_qp(sid, name, f"mean {word} over the lots at level {level}", "",
                       "t interval of the mean", d, base + ["mean"], base + ["ci95"], "f3"))
        out.append(_qp(sid, f"{name}/cv_pct", f"CV of the {word} over the lots at level "
                       f"{level}", "%", None, d, base + ["cv_pct"], style="f1"))
        for lot in mf["lots"]:
            out.append(_qp(sid, f"{name}/{safe_name(lot)}", f"{word} of lot {lot} at level "
                           f"{level}", "", None, d, base + ["lots", lot], style="f3"))
    ml = m.get("matrix_factor_lots")
    if ml:
        base = ["method_recovery", "matrix_factor_lots"]
        out.append(_qp(sid, "method/matrix_factor/overall", f"mean {word} of the lots "
                       "(each lot's mean over the levels)", "", "t interval of the mean", d,
                       base + ["mean"], base + ["ci95"], "f3"))
        out.append(_qp(sid, "method/matrix_factor/overall/cv_pct", f"CV of the lots' mean "
                       f"{word}", "%", None, d, base + ["cv_pct"], style="f1"))
        for lot in ml["lots"]:
            out.append(_qp(sid, f"method/matrix_factor/lots/{safe_name(lot)}", f"{word} of lot "
                           f"{lot}, mean over the levels", "", None, d,
                           base + ["lots", lot], style="f3"))
    for i, p in enumerate((d.get("precision") or {}).get("levels", [])):
        if p.get("s_r") is None:
            continue
        base, name = ["precision", "levels", i], f"precision/{safe_name(p['level'])}"
        what = f"at level {p['level']} ({p['grouping']})"
        iso = "ISO 5725-3 one-way components"
        for key, ci, text in (("s_r", "s_r_ci95", "repeatability SD s_r"),
                              ("s_L", None, "between-group SD s_L"),
                              ("s_I", "s_I_ci95", "intermediate-precision SD s_I")):
            out.append(_qp(sid, f"{name}/{key}", f"{text} {what} [{p['unit']}]", "",
                           iso + {"s_r": "; chi-square interval",
                                  "s_I": "; modified large-sample interval"}.get(key, ""),
                           d, base + [key],
                           base + [ci] if ci else None, "f2"))
        for key, text in (("rsd_r_pct", "repeatability RSD"), ("rsd_L_pct", "between-group RSD"),
                          ("rsd_I_pct", "intermediate-precision RSD")):
            out.append(_qp(sid, f"{name}/{key}", f"{text} {what}", "%", iso, d, base + [key],
                           style="f2"))
    return out


def _next_runs_register(sid: str, d: dict) -> list[Quantity | None]:
    """The next-run advice: the target's interval width now and, per batch, after the advised
    runs, with the runs themselves (``<study>/next_runs/k3/run1/pH``)."""
    a = d.get("next_runs")
    if not a or not a.get("batches"):
        return []
    what = a["target"]["width_of"]
    method = a["criterion"]
    base = ["next_runs", "batches"]
    out = [_q(sid, "next_runs/width_before", f"95 % interval width of {what} now (advice "
              f"target {a['target']['name']}; linearised)", "", method,
              base + [0, "width_before"], ("value",), "se", d)]
    for i, b in enumerate(a["batches"]):
        k = b["k"]
        tag = f"next_runs/k{k}"
        batch = f"after the advised batch of {k} run{'s' if k != 1 else ''}"
        out.append(_q(sid, f"{tag}/width_after", f"predicted 95 % interval width of {what} "
                      f"{batch}", "", method, base + [i, "width_after"], ("value",), "se", d))
        out.append(_q(sid, f"{tag}/shrink_pct", f"predicted shrinking of that width {batch}",
                      "%", method, base + [i, "shrink_pct"], ("value",), "g", d))
        if b.get("recovery_lower_pct_after") is not None:
            out.append(_q(sid, f"{tag}/recovery_lower_pct", f"predicted lower recovery bound "
                          f"of {a['target']['name']} {batch}", "%", method,
                          base + [i, "recovery_lower_pct_after"], ("value",), "pct", d))
        for j, g in enumerate(b.get("groups", [])):
            run = f"advised run {j + 1} of the batch of {k}"
            out.append(_q(sid, f"{tag}/run{j + 1}/pH", f"pH of {run}", "", None,
                          base + [i, "groups", j, "pH"], ("value",), "pH", d))
            out.append(_q(sid, f"{tag}/run{j + 1}/ratio", f"organic:aqueous ratio of {run}",
                          "", None, base + [i, "groups", j, "ratio"], ("value",), "g", d))
            if g["count"] > 1:
                out.append(_q(sid, f"{tag}/run{j + 1}/count", f"how many times to make {run}",
                              "runs", None, base + [i, "groups", j, "count"], ("value",), "int",
                              d))
    return out


def _verdict_register(sid: str, prefix: str, verdicts: list, base: list, d: dict) -> list:
    """The number behind each acceptance verdict, named by its criterion."""
    out, seen = [], {}
    for i, v in enumerate(verdicts):
        if v.get("value") is None:
            continue
        name = safe_name(v["criterion"])
        seen[name] = seen.get(name, 0) + 1
        if seen[name] > 1:
            name = f"{name}-{seen[name]}"
        pct = criterion_style(v["criterion"]) == "pct"
        out.append(_q(sid, f"{prefix}/{name}", f"value judged by the criterion "
                      f"{v['criterion']} ({v['status']})", "%" if pct else "", v.get("detail"),
                      base + [i, "value"], ("value",), criterion_style(v["criterion"]), d))
    return out


def _procedure_register(sid: str, k: int, pr: dict, d: dict) -> list[Quantity | None]:
    pid = safe_name(pr["id"])
    base = ["procedures", k]
    at = f"at pH {pr['pH']:g}"
    out = [
        _q(sid, f"{pid}/recovery_pct", f"predicted recovery of procedure {pr['id']}", "%",
           pr["recovery_pct"].get("ci95_method"), base + ["recovery_pct"],
           VALUE_CI + (("pi95_lo", "pi95_hi") if "pi95" in pr["recovery_pct"] else ()),
           "pct", d),
        _q(sid, f"{pid}/remaining_fraction",
           f"fraction left in the aqueous phase after procedure {pr['id']}", "fraction",
           pr["remaining_fraction"].get("ci95_method"), base + ["remaining_fraction"],
           VALUE_CI, "frac", d),
        _q(sid, f"{pid}/log_d", f"log D {at} (procedure {pr['id']})", "",
           pr["log_d"].get("ci95_method"), base + ["log_d"],
           ("value", "se", "ci95_lo", "ci95_hi"), "log", d),
    ]
    for i, ap in enumerate(pr.get("after_portions", [])):
        n = ap["portions"]
        out.append(_q(sid, f"{pid}/remaining_after/{n}",
                      f"fraction left after portion {n} of procedure {pr['id']}", "fraction",
                      ap.get("ci95_method"), base + ["after_portions", i], VALUE_CI, "frac", d))
    out.append(_q(sid, f"{pid}/split_limit_remaining_fraction",
                  f"fraction left when the total solvent of procedure {pr['id']} is split "
                  "into ever more portions (the limit)", "fraction",
                  pr["split_limit_remaining_fraction"].get("ci95_method"),
                  base + ["split_limit_remaining_fraction"], VALUE_CI, "frac", d))
    out.append(_q(sid, f"{pid}/split_limit_recovery_pct",
                  f"recovery in the limit of ever more portions (procedure {pr['id']})", "%",
                  None, base + ["split_limit_recovery_pct"], ("value",), "pct", d))
    wc = pr.get("worst_case") or {}
    if wc:
        out.append(_q(sid, f"{pid}/worst_case/recovery_lo_pct",
                      f"lower 95 % end of recovery in the worst corner of the tolerances of "
                      f"procedure {pr['id']}", "%", None, base + ["worst_case", "recovery_pct"],
                      ("value",), "pct", d))
        out.append(_q(sid, f"{pid}/worst_case/predicted_recovery_pct",
                      f"predicted recovery in the worst corner of the tolerances of procedure "
                      f"{pr['id']}", "%", None, base + ["worst_case", "predicted_recovery_pct"],
                      ("value",), "pct", d))
        out.append(_q(sid, f"{pid}/worst_case/pH",
                      f"pH of the worst corner of the tolerances of procedure {pr['id']}", "",
                      None, base + ["worst_case", "pH"], ("value",), "pH", d))
    if pr.get("steps_needed"):
        out.append(_q(sid, f"{pid}/steps_needed",
                      f"fewest portions meeting the target at the lower 95 % end "
                      f"(procedure {pr['id']})", "portions", pr.get("steps_needed_note"),
                      base + ["steps_needed", "portions"], ("value",), "int", d))
    if pr.get("pH_window"):
        for i, end in enumerate(("lo", "hi")):
            out.append(_q(sid, f"{pid}/pH_window/{end}",
                          f"{'lower' if i == 0 else 'upper'} edge of the pH window meeting the "
                          f"target (procedure {pr['id']})", "", pr.get("pH_window_note"),
                          base + ["pH_window", i], ("value",), "pH", d))
    out.extend(_verdict_register(sid, f"{pid}/criteria", pr.get("verdicts") or [],
                                 base + ["verdicts"], d))
    for i, row in enumerate(pr.get("best_split", [])):
        n = row["portions"]
        out.append(_q(sid, f"{pid}/equal_split/{n}/recovery_pct",
                      f"predicted recovery with the total solvent of procedure {pr['id']} in "
                      f"{n} equal portion{'s' if n != 1 else ''}", "%", None,
                      base + ["best_split", i, "recovery_pct"], ("value",), "pct", d))
        out.append(_q(sid, f"{pid}/equal_split/{n}/recovery_lo_pct",
                      f"lower 95 % end of recovery with the total solvent of procedure "
                      f"{pr['id']} in {n} equal portion{'s' if n != 1 else ''}", "%", None,
                      base + ["best_split", i, "recovery_lo_pct"], ("value",), "pct", d))
    return out


def _selectivity_register(sid: str, d: dict) -> list[Quantity | None]:
    """Impurities' constants, work-up predictions and the best pH pair (``selectivity``)."""
    sel = d.get("selectivity") or {}
    out: list[Quantity | None] = []
    for i, imp in enumerate(sel.get("impurities") or []):
        name = safe_name(imp["name"])
        how = "declared" if imp.get("declared") else "fitted"
        for par, p in (imp.get("parameters") or {}).items():
            out.append(_q(sid, f"impurity/{name}/{safe_name(par)}",
                          f"{parameter_text(par)} of impurity {imp['name']} ({how})", "",
                          p.get("ci95_method") or imp.get("source"),
                          ["selectivity", "impurities", i, "parameters", par],
                          ("value", "se", "ci95_lo", "ci95_hi") if "se" in p else ("value",),
                          "log" if par.startswith("log") else "pH", d))
    for k, pr in enumerate(sel.get("procedures") or []):
        pid = safe_name(pr["id"])
        base = ["selectivity", "procedures", k]
        m = pr["recovery_pct"].get("ci95_method")
        out.append(_q(sid, f"{pid}/workup/recovery_pct",
                      f"recovery of the analyte in the product of procedure {pr['id']} "
                      f"({pr['product_phase']} phase)", "%", m, base + ["recovery_pct"],
                      VALUE_CI, "pct", d))
        if pr.get("impurity_content_pct"):
            out.append(_q(sid, f"{pid}/workup/impurity_content_pct",
                          f"impurities' share of the product of procedure {pr['id']} "
                          "(100 minus the purity)", "%",
                          pr["impurity_content_pct"].get("ci95_method"),
                          base + ["impurity_content_pct"], VALUE_CI, "frac", d))
        for imp, q in (pr.get("carry_over_pct") or {}).items():
            out.append(_q(sid, f"{pid}/workup/carry_over_pct/{safe_name(imp)}",
                          f"share of impurity {imp} carried into the product of procedure "
                          f"{pr['id']}", "%", q.get("ci95_method"),
                          base + ["carry_over_pct", imp], VALUE_CI, "frac", d))
        for imp, rows in (pr.get("log_separation_factor") or {}).items():
            for j, row in enumerate(rows):
                out.append(_q(sid, f"{pid}/workup/log_beta/{safe_name(imp)}/{row['step']}",
                              f"log10 separation factor D(analyte)/D({imp}) at step "
                              f"{row['step']} of procedure {pr['id']}", "",
                              row.get("ci95_method"),
                              base + ["log_separation_factor", imp, j], VALUE_CI, "log", d))
        pair = (pr.get("best_pH_pair") or {}).get("pair")
        if pair:
            b = base + ["best_pH_pair", "pair"]
            out.append(_q(sid, f"{pid}/best_pair/extract_pH",
                          f"extraction pH of the purest pair meeting the target (procedure "
                          f"{pr['id']})", "", None, b + ["extract_pH"], ("value",), "pH", d))
            out.append(_q(sid, f"{pid}/best_pair/last_step_pH",
                          f"{pair['last_step']} pH of the purest pair meeting the target "
                          f"(procedure {pr['id']})", "", None, b + ["last_step_pH"],
                          ("value",), "pH", d))
            pred = pair["prediction"]
            out.append(_q(sid, f"{pid}/best_pair/recovery_pct",
                          f"recovery at the purest pH pair (procedure {pr['id']})", "%",
                          pred["recovery_pct"].get("ci95_method"),
                          b + ["prediction", "recovery_pct"], VALUE_CI, "pct", d))
            if pred.get("impurity_content_pct"):
                out.append(_q(sid, f"{pid}/best_pair/impurity_content_pct",
                              f"impurities' share of the product at the purest pH pair "
                              f"(procedure {pr['id']})", "%",
                              pred["impurity_content_pct"].get("ci95_method"),
                              b + ["prediction", "impurity_content_pct"], VALUE_CI, "frac", d))
    return out


# -- exports ------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Dossier:
    """What every page and export shows about the dossier as a whole."""

    version: str             # dossier version id, e.g. "dv-3f2a9c1e0b7d"
    software: str            # e.g. "extractval 0.1.0"
    build_date: str          # ISO 8601, UTC


def register_rows(quantities: list[Quantity], dossier: Dossier, page: str,
                  inputs_key: str = "") -> list[dict]:
    """One row per identifier, for results.json and results.csv."""
    rows = []
    for q in quantities:
        for n in q.numbers:
            rows.append({
                "id": n.identifier,
                "study": q.study,
                "quantity": q.name,
                "statistic": n.statistic,
                "value": n.value,
                "unit": q.unit,
                "display": n.display,
                "description": q.description,
                "method": q.method,
                "citation": q.citation(n, dossier.version, dossier.software, inputs_key),
                "inputs_key": inputs_key,
                "url": f"{page}#{n.anchor}",
            })
    return rows


def _json(value) -> str:
    return json.dumps(value, indent=1, ensure_ascii=True, allow_nan=False)


def results_json(rows: list[dict], dossier: Dossier, studies: list[dict],
                 extra: dict | None = None) -> bytes:
    """The export: provenance, the studies, every number's row, and ``extra`` keys (e.g.
    ``solvent_comparison``, which names numbers by their identifiers)."""
    doc = {
        "dossier_version": dossier.version,
        "software": dossier.software,
        "build_date": dossier.build_date,
        "studies": studies,
        "numbers": rows,
        **(extra or {}),
    }
    return (_json(doc) + "\n").encode()


def json_item(value) -> str:
    """``value`` as :func:`results_json` writes an item of its "studies" or "numbers" list
    (one level deeper than the top), so that a build can keep each study's items and join
    them: ``results_json_of_parts`` gives the same bytes as :func:`results_json`."""
    return "  " + _json(value).replace("\n", "\n  ")   # JSON text holds no raw newline


def results_json_of_parts(dossier: Dossier, studies: list[str], numbers: list[str],
                          extra: dict | None = None) -> bytes:
    """:func:`results_json` from items already written (:func:`json_item`; a part of
    ``numbers`` may hold several items joined by ",\\n")."""
    head = _json({"dossier_version": dossier.version, "software": dossier.software,
                  "build_date": dossier.build_date})[:-2]

    def listed(items: list[str]) -> str:
        return "[\n" + ",\n".join(items) + "\n ]" if items else "[]"

    tail = "".join(f",\n {_json(k)}: {_json(v).replace(chr(10), chr(10) + ' ')}"
                   for k, v in (extra or {}).items())
    return (f'{head},\n "studies": {listed(studies)},\n "numbers": {listed(numbers)}'
            f"{tail}\n}}\n").encode()


CSV_COLUMNS = ("id", "study", "quantity", "statistic", "value", "unit", "display",
               "description", "method", "citation", "inputs_key", "url")
_NUMBER_TEXT = re.compile(r"[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?( ?%)?")


def csv_cell(value) -> str | float | int:
    """A cell a spreadsheet will not run: text starting with = + - @ (or tab, CR) is prefixed
    with a single quote, unless it is just a number such as "-1.200" (OWASP CSV injection
    advice, from memory). Numbers stay numbers.

    >>> csv_cell("=HYPERLINK(1)"), csv_cell("-1.200"), csv_cell(-1.2), csv_cell("@x")
    ("'=HYPERLINK(1)", '-1.200', -1.2, "'@x")
    """
    if value is None:
        return ""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return value
    text = str(value)
    if text[:1] in ("=", "+", "-", "@", "\t", "\r") and not _NUMBER_TEXT.fullmatch(text):
        return "'" + text
    return text


def results_csv(rows: list[dict]) -> bytes:
    return (_csv_lines([CSV_COLUMNS]) + csv_rows(rows)).encode("utf-8")


def csv_rows(rows: list[dict]) -> str:
    """The lines of results.csv for ``rows``, without its header."""
    return _csv_lines([csv_cell(row[c]) for c in CSV_COLUMNS] for row in rows)


def _csv_lines(rows) -> str:
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\r\n").writerows(rows)   # a float is written as repr
    return buf.getvalue()


def plot_name(kind: str, procedure_id: str | None = None) -> str:
    """File name of a plot inside the study's folder of the site."""
    if kind == "portions":
        return f"portions-{safe_name(procedure_id)}.svg"
    if kind == "calibration":
        return f"calibration-{safe_name(procedure_id)}.svg"
    if kind == "calibration_errors":
        return f"calibration-{safe_name(procedure_id)}-errors.svg"
    if kind == "purity_map":
        return f"purity-map-{safe_name(procedure_id)}.svg"
    if kind == "separation":
        return "separation-factor.svg"
    return {"log_d": "log-d-vs-ph.svg", "residuals": "residuals-vs-ph.svg",
            "design_space": "design-space.svg"}[kind]
