"""Markdown pages of the dossier from study dicts, through the Jinja2 templates in site_templates/.

Pure rendering: the input is what ``StudyReport.to_dict()`` returns (one dict per study) and
the output is a mapping of site paths to bytes (Markdown, SVG, JSON, CSV, CSS). No page knows
which static-site generator will publish it.

Every number goes through :meth:`StudyView.num`, which writes the value found at a JSON pointer
in the study dict, formatted. Rendered with ``trace=True`` each number also carries its pointer,
``<span class="xv-num" data-src=...>``: a test reads those back and compares them with the dict,
and checks that the published page is the traced one without the spans. (The published pages
leave the spans out: three HTML parsers read every page of the site, and the spans doubled the
tags they had to read.) Every text from a study goes
through :func:`~extractval.report.text.md_text` (the template environment's ``finalize``), so
nothing a study file says becomes markup.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import jinja2
from markupsafe import Markup

from ..formats import ONE_PHASE_PLOT_RANGE, OUTCOME_WORDS, is_bound
from .register import (CRITERION_LABELS, Dossier, Quantity, criterion_style, csv_rows,
                       fmt_number, json_item, plot_name, pointer, register_rows, resolve,
                       results_csv, results_json_of_parts, safe_name, study_register,
                       study_status)
from .text import html_attr, md_text

#: the dossier's Markdown files besides the study pages
INDEX, REGISTER, ABOUT = "index.md", "register.md", "about.md"
#: the whole dossier on one page, for print (study contents put in by report/printview.py)
PRINT = "print.md"
#: studies of one analyte in several solvents, side by side (extractval.solvent_choice)
SOLVENTS = "solvents.md"
CSS_SOURCE, CSS_PATH = "extra.css", "assets/extractval.css"
#: the copy-to-clipboard script: local, so it works with no network
JS_SOURCE, JS_PATH = "extra.js", "assets/extractval.js"
#: the register page's URL (directory URLs), where every number's citation line is anchored
REGISTER_URL = "register/"


def study_page_path(study_id: str) -> str:
    return f"studies/{safe_name(study_id)}/index.md"


def study_url(study_id: str) -> str:
    """The page's URL relative to the site root (directory URLs)."""
    return f"studies/{safe_name(study_id)}/"


def _finalize(value):
    """Every ``{{ }}`` in a template: trusted Markup as is, anything else as inert text."""
    if isinstance(value, Markup):
        return value
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        raise TypeError(f"a number reached a template without num(): {value!r}")
    if value is None:
        return ""
    return md_text(value)


class _Undefined(jinja2.StrictUndefined):
    """A missing key tests false and iterates as empty, but printing one is an error."""

    def __bool__(self) -> bool:
        return False

    def __iter__(self):
        return iter(())

    def __len__(self) -> int:
        return 0


def environment(templates_dir: Path, compiled: Path | None = None) -> jinja2.Environment:
    """The templates' environment; ``compiled``: a folder keeping the compiled templates
    between builds (Jinja2's bytecode cache, checked against each template's source)."""
    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(templates_dir)), autoescape=False,
        finalize=_finalize, undefined=_Undefined, keep_trailing_newline=True,
        trim_blocks=True, lstrip_blocks=True,
        bytecode_cache=None if compiled is None else compiled_templates(compiled))
    env.filters["text"] = md_text
    env.filters["attr"] = html_attr
    env.filters["css_string"] = css_string
    env.globals["idname"] = safe_name          # a label as an identifier segment
    return env


def compiled_templates(folder: Path) -> jinja2.BytecodeCache | None:
    """Jinja2's bytecode cache in ``folder`` (None when it cannot be made: the templates are
    then compiled each build, which only costs time)."""
    try:
        Path(folder).mkdir(parents=True, exist_ok=True)
    except OSError:
        return None
    return jinja2.FileSystemBytecodeCache(str(folder))


def css_string(text) -> Markup:
    """Text for inside a double-quoted CSS string in a <style> block: quotes, backslashes,
    line breaks and '<' escaped as CSS escapes, so nothing ends the string or the block.

    >>> print(css_string('A"B</style>'))
    A\\22 B\\3c /style\\3e
    """
    out = []
    for ch in str(text):
        if ch in '"\\<>&\n\r' or ord(ch) < 32:
            out.append(f"\\{ord(ch):x} ")
        else:
            out.append(ch)
    return Markup("".join(out))


# -- one study ----------------------------------------------------------------------------------
@dataclass
class StudyView:
    """A study dict as the templates see it: text as is (escaped on output), numbers by pointer.

    ``num("/parameters/logK/value", "log")`` writes the value at that pointer. The register's
    quantities are reachable by identifier tail: ``q("logK")``, ``cell("logK", "ci95_lo")``.
    """

    d: dict
    dossier: Dossier
    quantities: list[Quantity] = field(default_factory=list)
    tag_study: bool = False          # name the study on each number (pages of many studies)
    trace: bool = False              # wrap each number in a span naming its pointer (tests)
    key: str = ""                    # the study's inputs key (sv-...), named in citations
    root: str = "../../"             # the site root relative to the page showing the view

    def __post_init__(self):
        self.by_name = {q.name: q for q in self.quantities}

    @property
    def id(self) -> str:
        return self.d["study"]

    def num(self, ptr: str, style: str, unit: str = "") -> Markup:
        value = resolve(self.d, ptr)
        return self._span(ptr, value, style, unit)

    def num_at(self, style: str, *parts, unit: str = "") -> Markup:
        return self.num(pointer(*parts), style, unit)

    def opt_at(self, style: str, *parts, unit: str = "") -> Markup:
        """Like :meth:`num_at`, but empty where the dict has no value (an optional column)."""
        ptr = pointer(*parts)
        return self.num(ptr, style, unit) if self.has(ptr) else Markup("")

    def _span(self, ptr, value, style, unit="") -> Markup:
        shown = fmt_number(value, style)
        if unit and value is not None:
            shown += f" {unit}"
        if not self.trace:
            return md_text(shown)
        study = f' data-study="{html_attr(self.id)}"' if self.tag_study else ""
        return Markup(f'<span class="xv-num"{study} data-src="{html_attr(ptr)}">'
                      f"{md_text(shown)}</span>")

    def has(self, ptr: str) -> bool:
        try:
            return resolve(self.d, ptr) is not None
        except (KeyError, IndexError, TypeError):
            return False

    def q(self, name: str) -> Quantity | None:
        return self.by_name.get(safe_name(name) if "/" not in name else name)

    def cell(self, name: str, statistic: str = "value") -> Markup:
        """A register number (by quantity name and statistic) as a span; empty if absent."""
        q = self.q(name)
        n = q.get(statistic) if q else None
        if n is None:
            return Markup("")
        return self._span(n.source, n.value, n.style)

    def interval(self, name: str, lo: str = "ci95_lo", hi: str = "ci95_hi") -> Markup:
        """"a to b"; an interval whose two ends are the same bound ("> 99.99") is written once,
        as "entirely > 99.99"."""
        q = self.q(name)
        if q is None or q.get(lo) is None:
            return Markup("")
        n_lo, n_hi = q.get(lo), q.get(hi)
        shown_lo = fmt_number(n_lo.value, n_lo.style)
        if n_hi is not None and is_bound(shown_lo) and \
                fmt_number(n_hi.value, n_hi.style) == shown_lo:
            return Markup(f'<span class="xv-iv">entirely {self.cell(name, lo)}</span>')
        return Markup(f'<span class="xv-iv">{self.cell(name, lo)} to {self.cell(name, hi)}</span>')

    def link(self, name: str, statistic: str = "value") -> Markup:
        """A number's identifier beside it: a button copying its citation line (anchored at
        the identifier, so the page's address with ``#<id>`` still finds the number) and a
        link to its line in the register."""
        q = self.q(name)
        n = q.get(statistic) if q else None
        if n is None:
            return Markup("")
        # a page of one study names numbers without its id, a page of many with it (and
        # leaves the anchors to the study page, where each number has its one anchor)
        return copy_button(n.identifier, self.citation(q, n), self.root + REGISTER_URL,
                           anchor=None if self.tag_study else n.anchor,
                           shown=n.identifier if self.tag_study else
                           n.identifier.split("/", 1)[-1])

    def citation(self, q: Quantity, n) -> str:
        return q.citation(n, self.dossier.version, self.dossier.software, self.key)

    def register(self) -> list[dict]:
        """Rows of the study's register section: identifier, number, citation."""
        rows = []
        for q in self.quantities:
            for n in q.numbers:
                rows.append({
                    "identifier": n.identifier,
                    "anchor": html_attr(n.anchor),
                    "number": self._span(n.source, n.value, n.style,
                                         "%" if q.unit == "%" else ""),
                    "unit": q.unit,
                    "description": q.description,
                    "statistic": n.statistic,
                    "citation": self.citation(q, n),
                    "button": copy_button(n.identifier, None, ""),   # copies the line
                })
        return rows

    def count(self) -> Markup:
        """How many identifiers the study has (a count of the register, not a result)."""
        return Markup(str(sum(len(q.numbers) for q in self.quantities)))

    def parameters(self) -> list[tuple[str, dict]]:
        return list(self.d.get("parameters", {}).items())

    def runs(self, status: str | None = None) -> list[tuple[int, dict]]:
        return [(i, r) for i, r in enumerate(self.d.get("run_table", []))
                if status is None or r["status"] == status]

    def procedures(self) -> list[tuple[int, dict]]:
        return list(enumerate(self.d.get("procedures", [])))

    def impurities(self) -> list[tuple[int, dict]]:
        return list(enumerate((self.d.get("selectivity") or {}).get("impurities") or []))

    def workups(self) -> list[tuple[int, dict]]:
        """The work-up predictions worth a section: procedures with steps or impurities."""
        sel = self.d.get("selectivity") or {}
        return [(k, w) for k, w in enumerate(sel.get("procedures") or [])
                if len(w["steps"]) > 1 or sel.get("impurities")]

    def judged_recovery(self, k: int) -> str:
        """Register name of the recovery procedure ``k`` is judged on (its work-up's product
        for a procedure with steps): what its tile and the index show."""
        from ..solvent_choice import judged_recovery

        return judged_recovery(self.d, k)

    def stepped(self, k: int) -> bool:
        return "/workup/" in self.judged_recovery(k)

    def plot(self, kind: str, procedure_id: str | None = None) -> str:
        return plot_name(kind, procedure_id)

    def status(self) -> tuple[str, str]:
        return study_status(self.d)


def copy_button(identifier: str, citation: str | None, register_url: str,
                anchor: str | None = None, shown: str | None = None) -> Markup:
    """A number's id with a button that copies its citation line (assets/extractval.js; works
    offline, with a fallback where navigator.clipboard is missing, e.g. over plain http).
    With ``register_url`` the id links to the number's line in the register; ``shown`` is the
    id as written there (on a study page: without the study id, which heads the page).
    Without ``citation`` the button copies the line it stands in (``p.xv-reg``: the register,
    where the line is shown anyway; the page is then 30 % smaller)."""
    ident = html_attr(identifier)
    id_attr = f' id="{html_attr(anchor)}"' if anchor else ""
    label = (f'<a class="xv-id-link" href="{html_attr(register_url)}#{ident}" '
             f'title="{ident} in the register">{md_text(shown or identifier)}</a>'
             if register_url else "")
    cite = "" if citation is None else f' data-cite="{html_attr(citation)}"'
    return Markup(f'<span class="xv-idcell"{id_attr}>{label}<button type="button" '
                  f'class="xv-copy"{cite} title="Copy the citation line of {ident}" '
                  f'aria-label="Copy the citation line of {ident}">copy</button></span>')


def all_verdicts(d: dict) -> list[dict]:
    """The study's verdicts and those of every procedure, in page order."""
    out = list(d.get("verdicts") or [])
    for pr in d.get("procedures", []):
        out.extend(pr.get("verdicts") or [])
    return out


#: the suitability limits as the System suitability section names them
LIMIT_WORDS = {"resolution_min": "R<sub>s</sub> ≥", "tailing_max": "T ≤",
               "injection_rsd_max_pct": "injection RSD ≤", "injections_min": "injections ≥",
               "plates_min": "N ≥", "retention_factor_min": "k ≥"}


SYSTEM_LABELS = {"aqueous": "Aqueous phase", "organic": "Organic phase (solvent)",
                 "temperature_C": "Temperature"}
TARGET_LABELS = {"recovery_pct": "Target recovery (%)", "max_rsd_pct": "Largest RSD (%)",
                 "mass_balance_pct": "Mass balance band (%)",
                 "ratio_agreement_log": "Agreement of log D between volume ratios (log units)",
                 "level": "Analyte level", "purity_pct": "Purity of the product (%)",
                 "lack_of_fit_alpha": "Lack of fit judged at alpha"}
#: rows of the solvent data table under the study's cautions (keys of extractval/solvents.py)
FACT_LABELS = {"density_g_mL": "Density (g/mL, 20-25 °C)", "boiling_point_C": "Boiling point (°C)",
               "flash_point_C": "Flash point, closed cup (°C)",
               "solubility_in_water_g_100g": "Dissolves in water (g per 100 g water)",
               "water_in_solvent_pct": "Takes up water (% by mass)",
               "peroxide_former": "Forms peroxides", "halogenated": "Halogenated",
               "ich_q3c_class": "ICH Q3C(R8) residual-solvent class",
               "ich_q3c_limit_ppm": "ICH Q3C(R8) limit (ppm)", "layer": "Layer beside water",
               "ghs_flammable_category": "GHS flammable-liquid category"}
FACT_NONE = {"flash_point_C": "none", "ich_q3c_class": "not listed",
             "ghs_flammable_category": "not classified as flammable"}
PARAMETER_LABELS = {"logK": "log K", "pKa": "pKa", "pKa1": "pKa1", "pKa2": "pKa2",
                    "logK_ion": "log K (ion pair)"}


@dataclass(frozen=True)
class StudyInput:
    """One study as the site layer hands it to the pages: a dict, or the errors instead."""

    study_id: str
    data: dict | None                    # StudyReport.to_dict(), JSON round-tripped
    errors: tuple[str, ...] = ()         # located errors when the study could not be read
    plots: tuple[str, ...] = ()          # plot file names present for this study
    key: str = ""                        # content key of the study's inputs
    #: False: the study has numbers but its dict was not read (the build holds its page and
    #: its StudyParts from an earlier build); ``data`` is then None and must not be used
    loaded: bool = True


@dataclass(frozen=True)
class StudyParts:
    """What the pages and exports that list every study show of one study, made once and
    kept between builds while the study is unchanged (the dossier's version and date are
    whatever the Dossier they were made with says, in the site build its tokens)."""

    study_id: str
    key: str
    index_row: str                     # its row of the home page's table
    register_count: int                # how many numbers it has (0: no register section)
    register_section: str              # its section of the number register
    listing_json: str                  # its entry of results.json "studies", as written there
    numbers_json: str                  # its rows of results.json "numbers", as written there
    numbers_csv: str                   # its rows of results.csv
    runs: dict | None                  # run counts (total, used, excluded); None: not read
    analyte: str = ""                  # analyte and organic phase as solvent_choice compares
    organic: str = ""                  # them (solvent_study_ids)

    def to_dict(self) -> dict:
        return dict(self.__dict__)

    @classmethod
    def from_dict(cls, d: dict) -> StudyParts:
        return cls(**d)


class TemplateProblem(Exception):
    """A template in site_templates/ could not be rendered; the message says where."""


def _study_of(ctx: dict) -> str:
    s = ctx.get("s")
    if isinstance(s, StudyView):
        return f"study {s.id}"
    return f"study {ctx['study_id']}" if "study_id" in ctx else "the dossier pages"


class Pages:
    """Renders the dossier's pages from study inputs with the templates of one folder."""

    def __init__(self, templates_dir: Path, trace: bool = False,
                 compiled: Path | None = None):
        self.templates_dir = Path(templates_dir)
        self.trace = trace
        self.env = environment(self.templates_dir, compiled)
        self._registers: dict[int, list[Quantity]] = {}

    def _register(self, data: dict) -> list[Quantity]:
        """The study's register, built once per dict for all the pages that show it."""
        key = id(data)
        if key not in self._registers:
            self._registers[key] = study_register(data)
        return self._registers[key]

    def _render(self, name: str, **ctx) -> str:
        try:
            return self.env.get_template(name).render(**ctx)
        except jinja2.TemplateSyntaxError as exc:
            raise TemplateProblem(f"{exc.filename or name}, line {exc.lineno}: {exc.message}")
        except (jinja2.TemplateError, TypeError, KeyError, IndexError, AttributeError) as exc:
            raise TemplateProblem(f"{self.templates_dir / name}: {type(exc).__name__}: {exc} "
                                  f"(while rendering{' ' + _study_of(ctx) if ctx else ''})")

    def study_page(self, s: StudyInput, dossier: Dossier) -> str:
        if s.data is None:
            return self._render("failed.md.j2", study_id=s.study_id, errors=s.errors,
                                dossier=dossier, key=s.key)
        view = StudyView(s.data, dossier, self._register(s.data), trace=self.trace, key=s.key)
        return self._render("study.md.j2", s=view, d=s.data, dossier=dossier,
                            plots=set(s.plots), key=s.key, labels=SYSTEM_LABELS,
                            target_labels=TARGET_LABELS, names=PARAMETER_LABELS,
                            criteria=CRITERION_LABELS, criterion_style=criterion_style,
                            one_phase=[round(100 * x) for x in ONE_PHASE_PLOT_RANGE],
                            fact_labels=FACT_LABELS, fact_none=FACT_NONE,
                            register_url=REGISTER_URL, limit_words=LIMIT_WORDS,
                            outcome_words=OUTCOME_WORDS)

    def index_row(self, s: StudyInput, dossier: Dossier) -> str:
        """The study's row of the home page's table."""
        view = (StudyView(s.data, dossier, self._register(s.data), tag_study=True,
                          trace=self.trace, key=s.key, root="") if s.data else None)
        return self._render("index_row.md.j2", st=s, s=view, dossier=dossier, url=study_url,
                            names=PARAMETER_LABELS)

    def index_page(self, studies: list[StudyInput], dossier: Dossier, counts: dict,
                   rows: list[str] | None = None) -> str:
        """The home page; ``rows`` are the studies' rows when already made (index_row)."""
        if rows is None:
            rows = [self.index_row(s, dossier) for s in studies]
        return self._render("index.md.j2", rows=[Markup(r) for r in rows], dossier=dossier,
                            counts=counts, url=study_url, names=PARAMETER_LABELS)

    def register_section(self, s: StudyInput, dossier: Dossier) -> tuple[int, str]:
        """(how many numbers, the study's section of the register); (0, "") without numbers."""
        if s.data is None:
            return 0, ""
        view = StudyView(s.data, dossier, self._register(s.data), tag_study=True,
                         trace=self.trace, key=s.key, root="../")
        return (sum(len(q.numbers) for q in view.quantities),
                self._render("register_study.md.j2", s=view, dossier=dossier, url=study_url))

    def register_page(self, studies: list[StudyInput], dossier: Dossier,
                      parts: list[StudyParts] | None = None) -> str:
        """The number register; ``parts`` are the studies' parts when already made."""
        if parts is None:
            entries = [_RegisterEntry(s.study_id, s.key, *self.register_section(s, dossier))
                       for s in studies if s.data is not None]
        else:
            entries = [_RegisterEntry(p.study_id, p.key, p.register_count,
                                      p.register_section)
                       for p in parts if p.register_section]
        return self._render("register.md.j2", entries=entries, dossier=dossier, url=study_url)

    def changes_page(self, comparison, versions: list[dict], current: str) -> str:
        """The Changes page: a :class:`~extractval.compare.Comparison` (or None) rendered."""
        return self._render("changes.md.j2", c=comparison, versions=versions, current=current)

    def approvals_page(self, rows: list, keys: dict[str, str]) -> str:
        """The Review and approval page: ApprovalRows and each study's inputs key now."""
        return self._render("approvals.md.j2", rows=rows, studies=sorted(keys.items()),
                            url=study_url)

    def solvents_page(self, studies: list[StudyInput], dossier: Dossier) -> str:
        """Studies of one analyte in different solvents, side by side; each number through
        its own study's register (the identifiers of the study pages)."""
        from ..solvent_choice import BEST_RULE, comparisons
        from ..solvents import Q3C

        views = {s.study_id: StudyView(s.data, dossier, self._register(s.data), tag_study=True,
                                       trace=self.trace, key=s.key, root="../")
                 for s in studies if s.data is not None}
        groups = comparisons([s.data for s in studies if s.data is not None])
        return self._render("solvents.md.j2", groups=groups, views=views, dossier=dossier,
                            url=study_url, best_rule=BEST_RULE, q3c_source=Q3C)

    def print_page(self, studies: list[StudyInput], dossier: Dossier, counts: dict,
                   rows: list[str] | None = None) -> str:
        """The whole dossier for print: the overview's provenance and table here; each
        study's content is put in at the marker once the study pages are written."""
        from .printview import MARKER, rebase_html

        if rows is None:
            rows = [self.index_row(s, dossier) for s in studies]
        to_dir = PRINT[:-len(".md")] + "/"
        return self._render("print.md.j2", rows=[Markup(rebase_html(r, "", to_dir))
                                                 for r in rows],
                            dossier=dossier, counts=counts, marker=Markup(MARKER))

    def about_page(self, dossier: Dossier) -> str:
        return self._render("about.md.j2", dossier=dossier)

    def css(self) -> bytes:
        return (self.templates_dir / CSS_SOURCE).read_bytes()

    def js(self) -> bytes:
        return (self.templates_dir / JS_SOURCE).read_bytes()

    def study_parts(self, s: StudyInput, dossier: Dossier) -> StudyParts:
        """Everything the pages and exports listing every study show of ``s``."""
        count, section = self.register_section(s, dossier)
        rows = ([] if s.data is None else
                register_rows(self._register(s.data), dossier, REGISTER_URL, s.key))
        status = ("not published: input errors" if s.data is None
                  else study_status(s.data)[1])
        listing = {"study": s.study_id, "page": study_url(s.study_id), "status": status,
                   "verdict": None if s.data is None else s.data.get("status"),
                   "inputs_key": s.key, "runs": run_record(s.data)}
        runs = None if s.data is None else {k: s.data["runs"][k]
                                             for k in ("total", "used", "excluded")}
        from ..solvent_choice import _key

        d = s.data or {}
        return StudyParts(s.study_id, s.key, self.index_row(s, dossier), count, section,
                          json_item(listing), ",\n".join(json_item(r) for r in rows),
                          csv_rows(rows), runs, _key(d.get("analyte")),
                          _key((d.get("system") or {}).get("organic")))

    def dossier_files(self, studies: list[StudyInput], dossier: Dossier,
                      counts: dict, skip: set[str] = frozenset(),
                      parts: dict[str, StudyParts] | None = None) -> dict[str, bytes]:
        """Every generated file of the site except the plots, by site path. A study page
        whose path is in ``skip`` is left empty (the build reuses its finished HTML).
        ``parts``, by study id, are parts already made (StudyParts); those missing are made
        and added to it."""
        studies = sorted(studies, key=lambda s: s.study_id)
        parts = {} if parts is None else parts
        for s in studies:
            if s.study_id not in parts:
                if not s.loaded:
                    raise ValueError(f"study {s.study_id}: not read, and no parts given")
                parts[s.study_id] = self.study_parts(s, dossier)
        made = [parts[s.study_id] for s in studies]
        files = {INDEX: self.index_page(studies, dossier, counts,
                                        [p.index_row for p in made]).encode(),
                 REGISTER: self.register_page(studies, dossier, made).encode(),
                 ABOUT: self.about_page(dossier).encode(),
                 PRINT: self.print_page(studies, dossier, counts,
                                        [p.index_row for p in made]).encode(),
                 CSS_PATH: self.css(), JS_PATH: self.js()}
        for s in studies:
            path = study_page_path(s.study_id)
            if path in skip:
                files[path] = b""
            elif not s.loaded:
                raise ValueError(f"study {s.study_id}: not read, and its page is not kept")
            else:
                files[path] = self.study_page(s, dossier).encode()
        members = solvent_study_ids(made)
        unread = sorted(s.study_id for s in studies if s.study_id in members and not s.loaded)
        if unread:
            raise ValueError(f"studies {', '.join(unread)}: compared by solvent, but not read")
        groups = solvent_groups([s for s in studies if s.study_id in members])
        if groups:
            files[SOLVENTS] = self.solvents_page(
                [s for s in studies if s.study_id in members], dossier).encode()
        files["results.json"] = results_json_of_parts(
            dossier, [p.listing_json for p in made],
            [p.numbers_json for p in made if p.numbers_json],
            {"solvent_comparison": [g.to_dict() for g in groups]})
        files["results.csv"] = results_csv([]) + "".join(
            p.numbers_csv for p in made).encode("utf-8")
        return files


@dataclass(frozen=True)
class _RegisterEntry:
    id: str
    key: str
    count: int
    section: Markup

    def __post_init__(self):
        object.__setattr__(self, "section", Markup(self.section))


def run_record(d: dict | None) -> list[dict]:
    """Each run's inputs and status as results.json keeps them (for `extractval compare`)."""
    from ..compare import RUN_FIELDS

    return [{"run": r["run"], **{k: r.get(k) for k in RUN_FIELDS}}
            for r in (d or {}).get("run_table") or []]


def solvent_study_ids(parts: list[StudyParts]) -> set[str]:
    """The studies that solvent_groups puts in a group (an analyte named in two or more
    studies with different organic phases), from their parts alone."""
    organics: dict[str, set[str]] = {}
    for p in parts:
        if p.analyte and p.runs is not None:
            organics.setdefault(p.analyte, set()).add(p.organic)
    return {p.study_id for p in parts
            if p.analyte and p.runs is not None and len(organics[p.analyte]) >= 2}


def solvent_groups(studies: list[StudyInput]) -> list:
    """The analytes studied in two or more solvents (extractval.solvent_choice)."""
    from ..solvent_choice import comparisons

    return comparisons([s.data for s in studies if s.data is not None])


def nav(studies: list[StudyInput], compared: bool | None = None) -> list:
    """The site's navigation, in the plain structure MkDocs' ``nav`` setting takes; the
    "Solvents compared" page only when an analyte was studied in two or more solvents
    (``compared``: whether one was, when already known from the studies' parts)."""
    if compared is None:
        compared = bool(solvent_groups(studies))
    return [{"Overview": INDEX},
            {"Studies": [{safe_name(s.study_id): study_page_path(s.study_id)}
                         for s in sorted(studies, key=lambda s: s.study_id)]},
            *([{"Solvents compared": SOLVENTS}] if compared else []),
            {"Number register": REGISTER},
            {"About this dossier": ABOUT},
            {"Print the dossier": PRINT}]
