"""The whole-dossier print page put together from finished study pages (report/printview.py),
without a site generator: links rebased, ids kept apart per study, each study on its own
named CSS page whose running head names it. The browser test prints the real page."""

from __future__ import annotations

import pytest

from extractval.report.printview import (MARKER, PrintedStudy, article, assemble, rebase_url,
                                         section, study_body)


def _page(body: str) -> str:
    return ('<html><head><title>x</title></head><body><nav><a href="../../">home</a></nav>'
            f'<article class="md-content__inner md-typeset">{body}</article>'
            '<footer>f</footer></body></html>')


@pytest.mark.parametrize("url, expected", [
    ("log-d-vs-ph.svg", "../studies/A-1/log-d-vs-ph.svg"),
    ("../../register/#A-1/logK", "../register/#A-1/logK"),
    ("../../results.csv", "../results.csv"),
    ("../B-2/", "../studies/B-2/"),
    ("#system-and-inputs", "#system-and-inputs"),
    ("https://example.org/a.svg", "https://example.org/a.svg"),
    ("data:image/png;base64,AAA", "data:image/png;base64,AAA"),
    ("/abs/path", "/abs/path"),
])
def test_relative_links_are_rebased_to_the_print_page(url, expected):
    assert rebase_url(url, "studies/A-1/", "print/") == expected


def test_article_is_the_page_content_only():
    assert article(_page("<h1>Study A</h1>")) == "<h1>Study A</h1>"
    with pytest.raises(ValueError, match="article"):
        article("<html><body>no content</body></html>")


def test_a_study_section_keeps_its_ids_apart_and_drops_its_own_page_head():
    body = ('<h1 id="study-a-1">Study A-1</h1>\n'
            '<style>@page { @top-left { content: "Study A-1"; } }</style>\n'
            '<h2 id="system-and-inputs">System and inputs</h2>'
            '<a href="#system-and-inputs">up</a><img src="log-d-vs-ph.svg">'
            '<span class="xv-idcell" id="A-1/logK"><a href="../../register/#A-1/logK">logK</a>'
            '</span>')
    out = section("A-1", study_body(PrintedStudy("A-1", "studies/A-1/", _page(body)), "print/"),
                  3)
    assert out.startswith('<section class="xv-print-study" id="print-A-1" '
                          'style="page: xv-study-3">')
    assert "@page {" not in out and "<nav>" not in out and "<footer>" not in out
    assert 'id="print-A-1--system-and-inputs"' in out
    assert 'href="#print-A-1--system-and-inputs"' in out
    assert 'id="print-A-1--A-1/logK"' in out
    assert 'src="../studies/A-1/log-d-vs-ph.svg"' in out
    assert 'href="../register/#A-1/logK"' in out


def test_assemble_puts_every_study_at_the_marker_with_its_running_head():
    studies = [PrintedStudy(s, f"studies/{s}/", _page(f'<h1 id="t">Study {s}</h1>'))
               for s in ("A-1", 'B"2')]
    page = _page(f"<h1>All</h1>\n<p>{MARKER}</p>")
    bodies = [(s.study_id, study_body(s, "print/")) for s in studies]
    out = assemble(page, bodies)
    assert MARKER not in out
    assert out.index("Study A-1</h1>") < out.index("Study B\"2</h1>")
    assert '@page xv-study-0 { @top-left { content: "Study A-1"; } }' in out
    # a quote in a study id cannot end the CSS string of the running head
    assert '@page xv-study-1 { @top-left { content: "Study B\\22 2"; } }' in out
    assert out.count('class="xv-print-study"') == 2
    assert assemble("<p>no marker</p>", bodies) == "<p>no marker</p>"
