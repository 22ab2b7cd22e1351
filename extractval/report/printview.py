"""The whole dossier as one page for print: the print page with every study page's content.

The print page (``print.md.j2``) holds the overview and a marker; once the site generator
has written every study page, :func:`assemble` puts each study page's content (its
``<article>``) at the marker, one section per study, each on its own named CSS page whose
running head names the study. Working on the finished HTML costs a few string operations
per study: nothing is rendered or converted a second time, so a study page kept from the
last build is not made again for the print page either, and its section's body is kept with
it (:func:`study_body`).

Each section's relative links are rebased from the study page's folder to the print page's,
and its ids (and the links to them inside the section) get the study's prefix, so headings
that every study page has ("System and inputs") do not collide.

>>> rebase_url("log-d-vs-ph.svg", "studies/A-1/", "print/")
'../studies/A-1/log-d-vs-ph.svg'
>>> rebase_url("../../register/#A-1/logK", "studies/A-1/", "print/")
'../register/#A-1/logK'
>>> rebase_url("https://example.org/x", "studies/A-1/", "print/")
'https://example.org/x'
"""

from __future__ import annotations

import posixpath
import re
from dataclasses import dataclass

from .text import html_attr

#: where the print page (print.md.j2) wants the studies
MARKER = "<!--xv-print-studies-->"
#: the theme's element around a page's content
_ARTICLE = re.compile(r'<article class="md-content__inner md-typeset">')
#: a study page's own running head (pages are printed alone with it); replaced here
_PAGE_STYLE = re.compile(r"<style>@page [^<]*</style>\n?")
_URL_ATTR = re.compile(r'(\s(?:src|href))="([^"]*)"')
_ID_ATTR = re.compile(r'(\sid)="([^"]*)"')
_SCHEME = re.compile(r"^[a-zA-Z][a-zA-Z0-9+.-]*:")


@dataclass(frozen=True)
class PrintedStudy:
    """One study for the print page: its id, its page's folder (site path) and finished HTML."""

    study_id: str
    folder: str            # e.g. "studies/HPA-2026-014/"
    html: str


def rebase_url(url: str, from_dir: str, to_dir: str) -> str:
    """``url`` as written on a page in ``from_dir``, for a page in ``to_dir`` (both site
    folders ending in "/"). Absolute URLs, other schemes and in-page anchors are kept."""
    if not url or url.startswith(("#", "/")) or _SCHEME.match(url):
        return url
    path, sep, fragment = url.partition("#")
    if not path:
        return url
    target = posixpath.normpath(posixpath.join(from_dir, path))
    if path.endswith("/"):
        target += "/"
    rel = posixpath.relpath(target, to_dir.rstrip("/") or ".")
    if target.endswith("/") and not rel.endswith("/"):
        rel += "/"
    return rel + sep + fragment


def rebase_html(html: str, from_dir: str, to_dir: str) -> str:
    """Every relative ``src`` and ``href`` of ``html`` rebased (see :func:`rebase_url`).

    >>> rebase_html('<a href="studies/A/">A</a>', "", "print/")
    '<a href="../studies/A/">A</a>'
    """
    return _URL_ATTR.sub(
        lambda m: f'{m.group(1)}="{rebase_url(m.group(2), from_dir, to_dir)}"', html)


def article(html: str) -> str:
    """The content of a finished page: what the theme's ``<article>`` holds."""
    m = _ARTICLE.search(html)
    if m is None:
        raise ValueError("no <article class=\"md-content__inner md-typeset\"> in the page")
    end = html.rfind("</article>")
    if end < m.end():
        raise ValueError("the page's <article> is not closed")
    return html[m.end():end]


def _section_id(study_id: str) -> str:
    return "print-" + re.sub(r"[^A-Za-z0-9_-]", "-", study_id)


def study_body(study: PrintedStudy, to_dir: str) -> str:
    """One study's content for the print page, its links rebased to ``to_dir`` and its ids
    prefixed. It depends on the study page alone, so a build keeps it with the page."""
    body = _PAGE_STYLE.sub("", article(study.html))
    prefix = _section_id(study.study_id) + "--"

    def url(m: re.Match) -> str:
        value = m.group(2)
        if value.startswith("#") and len(value) > 1:
            return f'{m.group(1)}="#{prefix}{value[1:]}"'
        return f'{m.group(1)}="{rebase_url(value, study.folder, to_dir)}"'

    body = _URL_ATTR.sub(url, body)
    return _ID_ATTR.sub(lambda m: f'{m.group(1)}="{prefix}{m.group(2)}"', body)


def section(study_id: str, body: str, index: int) -> str:
    """A study's body (:func:`study_body`) on the named CSS page ``xv-study-<index>``."""
    return (f'<section class="xv-print-study" id="{html_attr(_section_id(study_id))}" '
            f'style="page: xv-study-{index}">\n{body}\n</section>')


def page_rules(study_ids: list[str]) -> str:
    """The running head of each study's pages: the named pages of its sections."""
    from .pages import css_string

    rules = "".join(f'@page xv-study-{i} {{ @top-left {{ content: "Study {css_string(s)}"; }} }}'
                    for i, s in enumerate(study_ids))
    return f"<style>{rules}</style>"


def assemble(print_html: str, bodies: list[tuple[str, str]]) -> str:
    """The print page with every study's section at its marker, from (study id, body) in
    print order (the page unchanged when it has no marker)."""
    if MARKER not in print_html:
        return print_html
    parts = [page_rules([study_id for study_id, _ in bodies])]
    parts += [section(study_id, body, i) for i, (study_id, body) in enumerate(bodies)]
    return print_html.replace(MARKER, "\n".join(parts), 1)
