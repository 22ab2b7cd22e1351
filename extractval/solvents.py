"""A small table of common extraction solvents and the bench cautions that follow from it.

Each value carries its source. Densities and boiling points are the CRC Handbook's "Physical
Constants of Organic Compounds" (as tabulated in the ``chemicals`` package, 1.5.2); flash points
are IEC 60079-20-1 (2010) values (as tabulated there too) where that standard lists the solvent;
the flammability category follows from flash point and boiling point by the UN GHS criteria
(:func:`ghs_flammable_category`); residual-solvent classes are those of ICH Q3C(R8). Values
recalled from memory say so: check them against the supplier's safety data sheet (SDS, section
9 for physical data, section 2 for the classification) before relying on them.

The table serves the dossier's cautions and may serve comparisons of solvents; it is no safety
data sheet. The SDS, local EHS rules and the laboratory's approved procedures always take
precedence.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import lru_cache

# -- sources --------------------------------------------------------------------------------
CRC = "CRC Handbook, Physical Constants of Organic Compounds (as tabulated in chemicals 1.5.2)"
IEC = "IEC 60079-20-1 (2010), closed cup (as tabulated in chemicals 1.5.2)"
Q3C = "ICH Q3C(R8) (2021), Tables 1-3 (from memory)"
SOLUBILITY = ("mutual solubility with water near 20-25 °C, values commonly tabulated in "
              "solvent handbooks (from memory; check SDS section 9)")
PEROXIDE_LISTS = ("lists of peroxide-forming chemicals, e.g. Kelly, Chem. Health Saf. 1996, "
                  "3(5), 28 (from memory)")
COMMON = "common practice"
GHS = "UN GHS Rev. 9 (2021), chapter 2.6, Table 2.6.1 (from memory)"
#: density of water at 20 °C, g/mL (CRC Handbook, from memory)
WATER_DENSITY_G_ML = 0.998


@dataclass(frozen=True)
class Fact:
    """One value of the table with where it comes from."""

    value: object
    source: str

    def to_dict(self) -> dict:
        return {"value": self.value, "source": self.source}


@dataclass(frozen=True)
class Solvent:
    """One solvent of the table; ``None`` values mean "none" (e.g. no flash point)."""

    name: str
    cas: str
    synonyms: tuple[str, ...]
    density_g_mL: Fact               # near 20-25 °C
    boiling_point_C: Fact
    flash_point_C: Fact              # closed cup; None: no flash point in the standard tests
    solubility_in_water_g_100g: Fact  # solvent dissolved by 100 g of water
    water_in_solvent_pct: Fact       # water taken up by the solvent, % by mass
    peroxide_former: Fact            # "yes", "low" or "no"
    halogenated: Fact
    ich_q3c_class: Fact              # 1, 2, 3 or None (not listed)
    ich_q3c_limit_ppm: Fact | None = None   # class 2 concentration limit
    ester: bool = False              # hydrolysed by strong base
    notes: tuple[tuple[str, Fact], ...] = ()   # (topic, caution) of this solvent alone

    @property
    def layer(self) -> str:
        """"upper" or "lower" beside a dilute aqueous phase, "either" near its density
        (thresholds: common practice, since brines reach about 1.2 g/mL)."""
        rho = self.density_g_mL.value
        if rho < WATER_DENSITY_G_ML - 0.05:
            return "upper"
        if rho > 1.25:
            return "lower"
        return "either"

    @property
    def ghs_flammable_category(self) -> int | None:
        return ghs_flammable_category(self.flash_point_C.value, self.boiling_point_C.value)

    def to_dict(self) -> dict:
        facts = {k: getattr(self, k).to_dict() for k in (
            "density_g_mL", "boiling_point_C", "flash_point_C", "solubility_in_water_g_100g",
            "water_in_solvent_pct", "peroxide_former", "halogenated", "ich_q3c_class")}
        if self.ich_q3c_limit_ppm is not None:
            facts["ich_q3c_limit_ppm"] = self.ich_q3c_limit_ppm.to_dict()
        facts["layer"] = {"value": self.layer,
                          "source": f"density against water {WATER_DENSITY_G_ML} g/mL; "
                                    f"{COMMON}"}
        facts["ghs_flammable_category"] = {"value": self.ghs_flammable_category,
                                           "source": f"from flash and boiling point by {GHS}"}
        return {"name": self.name, "cas": self.cas, "facts": facts,
                "notes": [dict(topic=t, **n.to_dict()) for t, n in self.notes]}


def ghs_flammable_category(flash_point_C: float | None, boiling_point_C: float) -> int | None:
    """UN GHS flammable-liquid category from flash point and initial boiling point [°C].

    Category 1: flash point < 23 and boiling point <= 35; 2: flash point < 23 and boiling
    point > 35; 3: flash point 23 to 60; 4: above 60 up to 93 (not adopted in the EU CLP);
    None: no flash point or above 93.

    >>> ghs_flammable_category(-45, 34.4), ghs_flammable_category(-4, 77.1)
    (1, 2)
    >>> ghs_flammable_category(35, 117.6), ghs_flammable_category(81, 194.7)
    (3, 4)
    >>> ghs_flammable_category(None, 39.8) is None
    True
    """
    if flash_point_C is None:
        return None
    if flash_point_C < 23.0:
        return 1 if boiling_point_C <= 35.0 else 2
    if flash_point_C <= 60.0:
        return 3
    if flash_point_C <= 93.0:
        return 4
    return None


def _s(name, cas, synonyms, rho, bp, fp, fp_source, sol, water, perox, halo, q3c, limit=None,
       ester=False, notes=()) -> Solvent:
    return Solvent(name, cas, tuple(synonyms), Fact(rho, CRC), Fact(bp, CRC), Fact(fp, fp_source),
                   Fact(sol, SOLUBILITY), Fact(water, SOLUBILITY),
                   Fact(perox, PEROXIDE_LISTS if perox != "no" else COMMON), Fact(halo, COMMON),
                   Fact(q3c, Q3C), None if limit is None else Fact(limit, Q3C), ester,
                   tuple((topic, Fact(text, src)) for topic, text, src in notes))


NO_FLASH = "no flash point in the standard closed-cup tests (SDS, from memory)"

#: the table, by name; water solubility as g of solvent per 100 g of water
SOLVENTS: dict[str, Solvent] = {s.name: s for s in (
    _s("dichloromethane", "75-09-2",
       ("dichloromethane", "methylene chloride", "methylene dichloride", "dcm", "ch2cl2"),
       1.327, 39.8, None, NO_FLASH, 1.3, 0.2, "no", True, 2, 600,
       notes=(("Pressure",
               "boils at about 40 °C: the pressure in a shaken funnel rises fast, so vent "
               "early and often.", COMMON),
              ("Health",
               "is suspected of causing cancer (GHS Carc. 2) and is restricted in several "
               "jurisdictions; keep exposure low in a fume hood.",
               "harmonised classification, EU CLP Annex VI (from memory)"))),
    _s("chloroform", "67-66-3", ("chloroform", "trichloromethane", "chcl3"),
       1.479, 61.2, None, NO_FLASH, 0.8, 0.1, "no", True, 2, 60,
       notes=(("Storage",
               "turns slowly into phosgene in light and air; it is sold stabilised (ethanol or "
               "amylene): use stabilised, dated stock kept dark.", COMMON),
              ("Health",
               "is suspected of causing cancer (GHS Carc. 2) and is toxic if inhaled; work "
               "in a fume hood.", "harmonised classification, EU CLP Annex VI (from memory)"))),
    _s("ethyl acetate", "141-78-6",
       ("ethyl acetate", "ethyl ethanoate", "etoac", "acoet"),
       0.900, 77.1, -4.0, IEC, 8.3, 3.3, "no", False, 3, ester=True),
    _s("diethyl ether", "60-29-7",
       ("diethyl ether", "ethyl ether", "ethoxyethane", "et2o"),
       0.714, 34.4, -45.0, IEC, 6.9, 1.3, "yes", False, 3,
       notes=(("Pressure and ignition",
               "boils at about 34 °C and its vapour, heavier than air, reaches distant "
               "ignition sources: vent the funnel very often and keep every flame and hot "
               "plate away.", COMMON),)),
    _s("methyl tert-butyl ether", "1634-04-4",
       ("methyl tert-butyl ether", "methyl t-butyl ether", "tert-butyl methyl ether",
        "t-butyl methyl ether", "methyl tertiary butyl ether", "mtbe", "tbme"),
       0.735, 55.1, -27.0, IEC, 4.8, 1.5, "low", False, 3),
    _s("toluene", "108-88-3", ("toluene", "methylbenzene", "toluol"),
       0.862, 110.6, 4.0, IEC, 0.05, 0.03, "no", False, 2, 890,
       notes=(("Health",
               "is suspected of damaging the unborn child (GHS Repr. 2); keep exposure low "
               "in a fume hood.", "harmonised classification, EU CLP Annex VI (from memory)"),)),
    _s("n-heptane", "142-82-5", ("n-heptane", "heptane", "heptanes"),
       0.680, 98.4, -7.0, IEC, 0.0003, 0.01, "no", False, 3),
    _s("n-hexane", "110-54-3", ("n-hexane", "hexane", "hexanes"),
       0.661, 68.7, -22.0, IEC, 0.001, 0.01, "no", False, 2, 290,
       notes=(("Health",
               "damages peripheral nerves on repeated exposure (GHS STOT RE 2); "
               "n-heptane is the usual substitute.", "harmonised classification, EU CLP Annex "
               "VI (from memory); the substitution is common practice"),)),
    _s("cyclohexane", "110-82-7", ("cyclohexane",),
       0.774, 80.7, -17.0, IEC, 0.006, 0.01, "no", False, 2, 3880),
    _s("1-butanol", "71-36-3",
       ("1-butanol", "n-butanol", "butan-1-ol", "n-butyl alcohol", "1-buoh", "n-buoh"),
       0.810, 117.6, 35.0, IEC, 7.7, 20.0, "no", False, 3,
       notes=(("Water in the extract",
               "takes up about a fifth of its mass in water and carries water and salts into "
               "the extract; dry the extract before weighing or concentrating it.", COMMON),)),
    _s("isopropyl acetate", "108-21-4",
       ("isopropyl acetate", "2-propyl acetate", "propan-2-yl acetate", "iproac", "ipac"),
       0.866, 88.6, 1.0, IEC, 2.9, 1.8, "no", False, 3, ester=True),
    _s("2-methyltetrahydrofuran", "96-47-9",
       ("2-methyltetrahydrofuran", "2-methyl tetrahydrofuran", "2-methyl-tetrahydrofuran",
        "2-methf", "methf", "2-mthf"),
       0.855, 80.0, -11.0, "supplier SDS (from memory)", 14.0, 4.4, "yes", False, 3,
       notes=(("Temperature",
               "dissolves less in water as the temperature rises (about 14 g per 100 g "
               "water at 20 °C): phase volumes depend on the temperature of the separation.",
               "from memory"),)),
    _s("1-octanol", "111-87-5", ("1-octanol", "n-octanol", "octan-1-ol", "octanol"),
       0.826, 194.7, 81.0, IEC, 0.05, 4.9, "no", False, None,
       notes=(("Separation",
               "is viscous and separates slowly; allow time for the layers to clear.",
               COMMON),)),
)}

# -- reading a solvent name from study.yaml ------------------------------------------------
_DASHES = re.compile("[\u2010-\u2015\u2212]")
#: words of a solvent description that name no solvent (saturation, ratios, grades, stabilisers)
_QUALIFIERS = frozenset(
    "pre presaturated saturated water buffer buffers aqueous phase the with and in of v w vol "
    "mixture mix dry anhydrous grade hplc analytical reagent stabilised stabilized containing "
    "ethanol amylene bht ppm ratio by volume mass solvent organic used".split())
_PRESATURATED = re.compile(r"\b(pre-?\s?saturated|water[- ]saturated|saturated with)\b")


def _normalise(text: str) -> str:
    text = _DASHES.sub("-", str(text)).lower()
    text = text.replace("tert.", "tert").replace("t.-", "t-")
    return re.sub(r"\s+", " ", text)


def _pattern(synonym: str) -> re.Pattern:
    return re.compile(r"(?<![a-z0-9])" + re.escape(synonym) + r"(?![a-z0-9])")


_SYNONYMS = sorted(((syn, s.name) for s in SOLVENTS.values() for syn in s.synonyms),
                   key=lambda pair: -len(pair[0]))
_PATTERNS = [(_pattern(syn), name) for syn, name in _SYNONYMS]


@dataclass(frozen=True)
class SolventMatch:
    """What the organic phase named in study.yaml is, as far as the table knows."""

    named: str
    solvents: tuple[Solvent, ...]    # in the order they are named
    unmatched: str | None            # words that name no solvent of the table
    presaturated: bool


def match_solvents(organic) -> SolventMatch:
    """The table's solvents named in ``system: organic`` (mixtures, synonyms, suffixes).

    >>> m = match_solvents("n-Heptane/MTBE 4:1 (v/v), pre-saturated with buffer")
    >>> [s.name for s in m.solvents], m.unmatched, m.presaturated
    (['n-heptane', 'methyl tert-butyl ether'], None, True)
    >>> m = match_solvents("cyclohexane + diisopropyl ether")
    >>> [s.name for s in m.solvents], m.unmatched
    (['cyclohexane'], 'diisopropyl ether')
    """
    return _match("" if organic is None else str(organic))


@lru_cache(maxsize=256)
def _match(named: str) -> SolventMatch:
    """:func:`match_solvents` of the name as written; kept per name, since a report asks twice
    (next-run advice, solvent cautions) and the studies of a dossier share a few solvents."""
    text = _normalise(named)
    found: list[tuple[int, str]] = []
    for pattern, name in _PATTERNS:
        for m in pattern.finditer(text):
            found.append((m.start(), name))
            text = text[:m.start()] + " " * (m.end() - m.start()) + text[m.end():]
    order: list[str] = []
    for _, name in sorted(found):
        if name not in order:
            order.append(name)
    words = [w for w in re.findall(r"[a-z][a-z0-9-]*[a-z0-9]|[a-z]", text)
             if len(w) > 1 and not all(part in _QUALIFIERS for part in w.split("-") if part)]
    return SolventMatch(named, tuple(SOLVENTS[n] for n in order),
                        " ".join(words) or None, bool(_PRESATURATED.search(_normalise(named))))


# -- cautions -------------------------------------------------------------------------------
def _num(x: float) -> str:
    return f"{x:g}"


def _c(topic: str, text: str) -> dict:
    return {"topic": topic, "text": text}


def _capital(name: str) -> str:
    """A name at the start of a sentence: "Toluene", but "n-hexane" and "1-butanol" as is."""
    return name if "-" in name[:2] else name[:1].upper() + name[1:]


def _flammability(s: Solvent) -> str:
    cat = s.ghs_flammable_category
    fp = s.flash_point_C.value
    if cat is None:
        return (f"{_capital(s.name)} is not classified as a flammable liquid (no flash point), "
                "but its vapour is harmful: work in a fume hood.")
    words = {1: "extremely flammable", 2: "highly flammable", 3: "flammable",
             4: "combustible"}[cat]
    cold = ", below room temperature" if fp < 20.0 else ""
    tail = {1: "no flame, hot plate or spark anywhere near; work in a fume hood",
            2: "no ignition sources nearby; work in a fume hood",
            3: "keep it away from ignition sources",
            4: "keep it away from heat (category 4 is not used in the EU CLP)"}[cat]
    return (f"{_capital(s.name)} is {words} (GHS category {cat}: flash point {_num(fp)} °C{cold}, "
            f"boiling point {_num(s.boiling_point_C.value)} °C): {tail}.")


def study_cautions(match: SolventMatch) -> list[dict]:
    """Solvent-specific cautions for the whole study: {"topic", "text"}, one or two sentences
    each."""
    if not match.solvents:
        return [_c("Not in the table",
                   f"The organic phase named in study.yaml ({match.named or 'none'}) is not in "
                   "the tool's table of common extraction solvents, so only the general "
                   "cautions are shown: read its SDS for which layer it forms, its "
                   "flammability, peroxide formation, halogen content and solubility in water.")]
    out: list[dict] = []
    if match.unmatched:
        out.append(_c("Not in the table",
                      f"Part of the organic phase named in study.yaml ({match.unmatched}) is not "
                      "in the tool's table of common extraction solvents: its cautions are not "
                      "shown here; read its SDS."))
    layers = {s.layer for s in match.solvents}
    names = ", ".join(f"{s.name} {s.density_g_mL.value:g} g/mL" for s in match.solvents)
    check = "Check which layer is which (a drop of water) before discarding anything."
    water = f"water {WATER_DENSITY_G_ML:g}"
    if layers == {"upper"}:
        text = f"The solvent is lighter than water ({names}; {water}): it is the upper layer. "
    elif layers == {"lower"}:
        text = f"The solvent is denser than water ({names}; {water}): it is the lower layer. "
    else:
        text = (f"Which layer the solvent forms depends on the mixture and the aqueous phase "
                f"({names}; {water}). ")
    out.append(_c("Layers", text + check))
    for s in match.solvents:
        name = _capital(s.name)
        perox = s.peroxide_former.value
        if perox == "yes":
            out.append(_c("Peroxides", f"{name} forms explosive peroxides on storage. Use "
                          "dated, inhibited stock, test it for peroxides before use and never "
                          "distil or evaporate it to dryness untested."))
        elif perox == "low":
            out.append(_c("Peroxides", f"{name} forms peroxides far more slowly than diethyl "
                          "ether; still date the stock and test old containers before "
                          "concentrating."))
        out.append(_c("Flammability", _flammability(s)))
        if s.halogenated.value:
            out.append(_c("Halogenated waste", f"{name} is halogenated. Collect it and the "
                          "extracts apart, as halogenated waste; exposure limits and national "
                          "restrictions apply."))
        sol, took = s.solubility_in_water_g_100g.value, s.water_in_solvent_pct.value
        if sol >= 1.0 or took >= 2.0:
            state = ("The study names the solvent as pre-saturated: the SOP must pre-saturate "
                     "the same way, or the volumes the predictions assume no longer hold."
                     if match.presaturated else
                     "Pre-saturate both phases, or expect the volumes to differ from those "
                     "the predictions assume (see each procedure).")
            out.append(_c("Phase volumes", f"{name} dissolves in water to about {_num(sol)} g "
                          f"per 100 g and takes up about {_num(took)} % water, so the phase "
                          f"volumes change on shaking. {state}"))
        q3c = s.ich_q3c_class.value
        if q3c is None:
            text = f"{name} is not listed in ICH Q3C(R8)."
        else:
            limit = (f", limit {_num(s.ich_q3c_limit_ppm.value)} ppm"
                     if s.ich_q3c_limit_ppm is not None else "")
            text = (f"{name} is ICH Q3C(R8) class {q3c}{limit}; if the extract leads to a "
                    "drug substance, its residue must be controlled.")
        out.append(_c("Residual solvent", text))
        out.extend(_c(topic, f"{name} {n.value}") for topic, n in s.notes)
    return out


_CARBONATE = re.compile(r"carbonate|bicarbonate|hydrogencarbonate|hydrogen carbonate|nahco3|"
                        r"na2co3|k2co3", re.IGNORECASE)
#: pH from which an ester solvent is hydrolysed noticeably during a work-up (common practice)
ESTER_HYDROLYSIS_PH = 10.0
#: pH below which a carbonate-containing aqueous phase gives off carbon dioxide (common practice)
CARBONATE_GAS_PH = 8.0
#: share of a first portion dissolved by the water worth a caution
DISSOLVED_SHARE = 0.02


def procedure_cautions(match: SolventMatch, procedure, aqueous=None) -> list[str]:
    """Cautions that depend on one procedure: its pH, its volumes, its number of portions."""
    p = procedure
    out: list[str] = []
    n = len(p.organic_mL)
    single = match.solvents[0] if len(match.solvents) == 1 and not match.unmatched else None
    if single is not None and n > 1 and single.layer in ("upper", "lower"):
        if single.layer == "upper":
            out.append(f"The solvent is the upper layer: after each of the {n} portions drain "
                       "the water into a clean flask, pour the solvent out through the top, and "
                       "return the water for the next portion.")
        else:
            out.append(f"The solvent is the lower layer: drain it after each of the {n} "
                       "portions; the water stays in the funnel for the next one.")
    if single is not None:
        sol = single.solubility_in_water_g_100g.value
        dissolved_mL = p.aqueous_mL * sol / 100.0 / single.density_g_mL.value
        share = dissolved_mL / p.organic_mL[0]
        if share >= DISSOLVED_SHARE and not match.presaturated:
            out.append(f"{_num(p.aqueous_mL)} mL of water dissolves about "
                       f"{dissolved_mL:.2g} mL of {single.name}, about {100 * share:.0f} % of "
                       f"the first {_num(p.organic_mL[0])} mL portion, which the predicted "
                       "recovery does not allow for: pre-saturate the phases or check the "
                       "volumes.")
        elif share >= DISSOLVED_SHARE:
            out.append(f"Without pre-saturation, {_num(p.aqueous_mL)} mL of water would "
                       f"dissolve about {dissolved_mL:.2g} mL of {single.name} (about "
                       f"{100 * share:.0f} % of the first {_num(p.organic_mL[0])} mL portion): "
                       "keep the SOP's phases pre-saturated as in the study.")
    hi = p.pH + (p.pH_tolerance or 0.0)
    for s in match.solvents:
        if s.ester and hi >= ESTER_HYDROLYSIS_PH:
            out.append(f"At pH {_num(p.pH)} {s.name} is slowly hydrolysed by the base (to an "
                       "alcohol and acetate), faster when warm: keep contact short and cool; "
                       "the runs the prediction rests on should have been made the same way.")
    if aqueous and _CARBONATE.search(str(aqueous)) and p.pH - (p.pH_tolerance or 0.0) < \
            CARBONATE_GAS_PH:
        out.append(f"The aqueous phase contains carbonate: at pH {_num(p.pH)} it gives off "
                   "carbon dioxide, so swirl unstoppered first and vent after every shake.")
    return out


def solvent_report(organic, procedures=(), aqueous=None) -> dict:
    """The ``solvent`` entry of a study dict: what the table knows and the cautions."""
    m = match_solvents(organic)
    return {
        "named": m.named,
        "in_table": bool(m.solvents),
        "unmatched": m.unmatched,
        "presaturated": m.presaturated,
        "solvents": [s.to_dict() for s in m.solvents],
        "cautions": study_cautions(m),
        "procedure_cautions": {p.id: procedure_cautions(m, p, aqueous) for p in procedures},
    }
