"""Study text made safe for Markdown pages: shown as the characters it holds, never as markup.

Markdown passes raw HTML through and gives meaning to ``* _ ` [ ] # | \\ { }`` and more, so
every character that could start markup is written as an HTML character reference. The page
then shows exactly what the study file says, and the search index holds the same text.

>>> str(md_text("<script>alert(1)</script>"))
'&lt;script&gt;alert(1)&lt;/script&gt;'
>>> str(md_text("a *b* | c"))
'a &#42;b&#42; &#124; c'
"""

from __future__ import annotations

import re

from markupsafe import Markup, escape

# Characters that start HTML or Markdown (incl. tables, attr_list, footnotes, abbreviations)
_REFS = {
    "&": "&amp;", "<": "&lt;", ">": "&gt;", '"': "&quot;", "'": "&#39;",
    "*": "&#42;", "_": "&#95;", "`": "&#96;", "[": "&#91;", "]": "&#93;", "#": "&#35;",
    "|": "&#124;", "\\": "&#92;", "{": "&#123;", "}": "&#125;", "!": "&#33;", "~": "&#126;",
    "^": "&#94;", "=": "&#61;", "+": "&#43;", ":": "&#58;", "$": "&#36;",
}
_SPECIAL = re.compile("[" + re.escape("".join(_REFS)) + "]")
_SPACE = re.compile(r"\s+")


def md_text(value) -> Markup:
    """``value`` as inert inline text: one line, every markup character as a reference."""
    if isinstance(value, Markup):
        return value
    text = _SPACE.sub(" ", "" if value is None else str(value)).strip()
    # a leading "-", "." or digit run followed by "." could still start a list on its own line;
    # inline use never puts study text at a line start, so the characters above are enough
    return Markup(_SPECIAL.sub(lambda m: _REFS[m.group(0)], text))


def html_attr(value) -> Markup:
    """``value`` for a double-quoted attribute of an inline HTML tag.

    Markdown sets a whole tag aside before it looks for emphasis, so only HTML's own
    characters need references, plus the two that act before that: "`" (code spans) and "|"
    (table cells).

    >>> str(html_attr('/a_b|"c"'))
    '/a_b&#124;&#34;c&#34;'
    """
    text = str(escape("" if value is None else value))
    return Markup(text.replace("`", "&#96;").replace("|", "&#124;"))
