"""The only module that imports MkDocs: a plugin that adds the dossier's generated files.

Everything else (reading studies, fitting, pages, plots, the register) lives in
:mod:`extractval.site` and :mod:`extractval.report` and knows nothing of MkDocs, so the dossier
can move to another site generator by replacing this module alone.
"""

from __future__ import annotations

import contextlib
import logging
import os
import re
from pathlib import Path

os.environ.setdefault("NO_MKDOCS_2_WARNING", "1")   # our users did not choose the theme

from mkdocs.commands import build as _mkdocs_build_module  # noqa: E402
from mkdocs.commands.build import build as _mkdocs_build  # noqa: E402
from mkdocs.config import config_options as c  # noqa: E402
from mkdocs.config.base import Config  # noqa: E402
from mkdocs.config.base import load_config as _load_config  # noqa: E402
from mkdocs.exceptions import MkDocsException, PluginError  # noqa: E402
from mkdocs.plugins import BasePlugin  # noqa: E402
from mkdocs.structure.files import File  # noqa: E402

from . import site  # noqa: E402
from .versions import VERSIONS  # noqa: E402
from .report.pages import PRINT, study_page_path, study_url  # noqa: E402
from .report.printview import PrintedStudy, assemble, study_body  # noqa: E402

#: the print page's folder in the site (directory URLs)
PRINT_DIR = PRINT[:-len(".md")]

log = logging.getLogger("mkdocs.plugins.extractval")
PLUGIN = "extractval"
#: `extractval serve` passes its options to the plugin through these
ENV_STUDIES, ENV_KEEP_GOING = "EXTRACTVAL_STUDIES", "EXTRACTVAL_KEEP_GOING"


class DossierConfig(Config):
    studies = c.Type(str, default="studies")      # relative to the folder of mkdocs.yml
    keep_going = c.Type(bool, default=False)


class DossierPlugin(BasePlugin[DossierConfig]):
    """Asks :mod:`extractval.site` for the generated files and hands them to MkDocs."""

    def __init__(self):
        super().__init__()
        self.prepared: site.Prepared | None = None     # set by `extractval build`
        self._blocks: dict[str, list[str]] = {}
        self._late: dict[str, list[str]] = {}          # set_aside_late's parts, by page
        #: each study's body of the print page, with the tokens, kept with its page
        self._print_bodies: dict[str, str] = {}
        self._done: set[str] = set()     # files already written with this build's values

    def _studies(self, config) -> Path:
        root = Path(config.config_file_path or ".").resolve().parent
        return (root / os.environ.get(ENV_STUDIES, self.config.studies)).resolve()

    def on_config(self, config):
        if self.prepared is None:          # plain `mkdocs build` / `mkdocs serve`
            keep_going = self.config.keep_going or os.environ.get(ENV_KEEP_GOING) == "1"
            try:
                self.prepared = site.prepare(
                    self._studies(config), Path(config.docs_dir),
                    Path(config.config_file_path), keep_going=keep_going, progress=log.info)
            except site.SiteBuildError as exc:
                raise PluginError(str(exc)) from None
        config.nav = self.prepared.nav
        config.copyright = self.prepared.footer
        return config

    def on_files(self, files, *, config):
        self._late.clear()
        for path, content in sorted(self.prepared.files.items()):
            old = files.get_file_from_path(path)
            if old is not None:
                files.remove(old)
            if path.endswith(".md") and LATE_OPEN.encode() in content:
                text, self._late[path] = set_aside_late(content.decode("utf-8"))
                content = text.encode("utf-8")
            files.append(File.generated(config, path, content=content))
        for path, source in sorted(self.prepared.linked.items()):
            old = files.get_file_from_path(path)
            if old is not None:
                files.remove(old)
            files.append(_LinkedFile.generated(config, path, abs_src_path=str(source)))
        return files

    # Python-Markdown parses every raw HTML block with an HTML parser only to pass it through
    # unchanged; the dossier's pages are mostly such blocks (tables, the register), so they
    # are set aside before the conversion and put back after it, which gives the same HTML
    # (tests/test_site_build.py compares both) in a tenth of the time. A block marked
    # data-search-exclude is put back only into the finished page, so the search index
    # never reads it either.
    def on_page_markdown(self, markdown, *, page, config, files):
        text, self._blocks[page.file.src_uri] = set_aside_html(markdown)
        return text

    def on_page_content(self, html, *, page, config, files):
        return put_back_html(html, self._blocks.get(page.file.src_uri, ()), searchable=True)

    def on_post_page(self, output, *, page, config):
        output = put_back_html(output, self._blocks.pop(page.file.src_uri, ()),
                               searchable=False)
        output = put_back_late(output, self._late.pop(page.file.src_uri, ()))
        p = self.prepared
        if p is not None and p.tokens and not (p.page_cache is not None
                                               and page.file.src_uri in p.page_keys):
            # this build's values now, unless the page's finished HTML is to be kept (the
            # kept copy holds the tokens; _reusing_pages writes it with the values)
            for token, value in p.tokens.items():
                output = output.replace(token, value)
            self._done.add(str(Path(page.file.abs_dest_path)))
        return output

    def on_post_build(self, *, config):
        """Put this build's dossier version and date in place of the tokens, in every page
        not yet written with them (the theme's 404 page; every page of a plain `mkdocs
        build`) and in the search index."""
        tokens = self.prepared.tokens if self.prepared is not None else {}
        if not tokens:
            return
        root = Path(config.site_dir)
        found = []
        for d, dirs, names in os.walk(root):
            if Path(d) == root and VERSIONS in dirs:
                dirs.remove(VERSIONS)     # published versions hold their own values
            found += [Path(d) / f for f in names
                      if f.endswith(".html") or f == "search_index.json"]
        for path in sorted(found):
            if str(path) in self._done:
                continue
            data = path.read_bytes()
            new = site.put_tokens(data, tokens)
            if new != data:
                path.write_bytes(new)
        self._done.clear()
        self._print_page(root)

    def _print_page(self, root: Path) -> None:
        """Put every study page's finished content into the print page (printview): the
        bodies kept with the pages in this build, else made from the written pages."""
        target = root / PRINT_DIR / "index.html"
        kept, self._print_bodies = self._print_bodies, {}
        if self.prepared is None or not target.is_file():
            return
        bodies = []
        try:
            for study_id in sorted(o.study_id for o in self.prepared.outcomes):
                body = kept.get(study_id)
                if body is None:
                    page = root / study_url(study_id) / "index.html"
                    if not page.is_file():
                        continue
                    body = _print_body(study_id, page.read_text(encoding="utf-8"))
                bodies.append((study_id, body))
        except ValueError as exc:
            raise PluginError(f"the print page: {exc}") from None
        html = assemble(target.read_text(encoding="utf-8"), bodies)
        for token, value in self.prepared.tokens.items():
            html = html.replace(token, value)
        target.write_text(html, encoding="utf-8")

    def on_env(self, env, *, config, files):
        """Keep the theme's compiled templates between builds, beside the page cache."""
        cache = self.prepared.page_cache if self.prepared is not None else None
        if cache is not None and env.bytecode_cache is None:
            from .report.pages import compiled_templates

            env.bytecode_cache = compiled_templates(cache.compiled / "theme")
        return env

    def on_serve(self, server, *, config, builder):
        server.watch(str(self._studies(config)))
        return server


def _print_body(study_id: str, page_html: str) -> str:
    """The study's body of the print page from its finished page (printview.study_body)."""
    return study_body(PrintedStudy(study_id, study_url(study_id), page_html), PRINT_DIR + "/")


class _LinkedFile(File):
    """A file whose bytes are those of a file kept on disk that is never changed in place (a
    plot in the cache, a version already published): the site gets a hard link to it, a
    copy where a link cannot be made (another disk, a file system without links)."""

    def copy_file(self, dirty: bool = False) -> None:
        dest = self.abs_dest_path
        os.makedirs(os.path.dirname(dest), exist_ok=True)
        with contextlib.suppress(FileNotFoundError):
            os.unlink(dest)
        try:
            os.link(self.abs_src_path, dest)
        except OSError:
            try:
                super().copy_file(dirty)
            except FileNotFoundError:
                raise PluginError(f"{self.abs_src_path}: a kept file disappeared during the "
                                  "build (another build using the same cache?); build "
                                  "again") from None


_HTML_START = re.compile(r"<(table|div|figure)(?=[\s>])")
#: a block whose inside is Markdown (the md_in_html extension) must go through Markdown
_MD_IN_HTML = re.compile(r"\smarkdown(?=[\s=>]|$)")


def _placeholder(i: int) -> str:
    return f"<!--xv-block-{i}-->"


def set_aside_html(markdown: str) -> tuple[str, list[str]]:
    r"""Replace each top-level raw HTML block by a placeholder comment: (text, blocks).

    A block is what Python-Markdown itself takes as one: it starts a line after a blank line
    with ``<table``, ``<div`` or ``<figure``, and ends with the line that closes that tag at
    the same depth, followed by a blank line (or the end). Anything else stays in the text,
    and so does a block with a ``markdown`` attribute (its inside is Markdown).

    >>> set_aside_html("# T\n\n<table>\n<tr><td>1</td></tr>\n</table>\n\nend")
    ('# T\n\n<!--xv-block-0-->\n\nend', ['<table>\n<tr><td>1</td></tr>\n</table>'])
    """
    lines = markdown.split("\n")
    out: list[str] = []
    blocks: list[str] = []
    i, after_blank = 0, True
    while i < len(lines):
        m = _HTML_START.match(lines[i]) if after_blank else None
        if m and not _MD_IN_HTML.search(lines[i].split(">", 1)[0]):
            opening = re.compile(rf"<{m.group(1)}(?=[\s>])")
            closing = f"</{m.group(1)}>"
            depth, j = 0, i
            while j < len(lines):
                depth += len(opening.findall(lines[j])) - lines[j].count(closing)
                if depth <= 0:
                    break
                j += 1
            if (j < len(lines) and lines[j].rstrip().endswith(closing)
                    and (j + 1 == len(lines) or not lines[j + 1].strip())):
                out.append(_placeholder(len(blocks)))
                blocks.append("\n".join(lines[i:j + 1]))
                i, after_blank = j + 1, False
                continue
        out.append(lines[i])
        after_blank = not lines[i].strip()
        i += 1
    return "\n".join(out), blocks


def put_back_html(html: str, blocks, searchable: bool) -> str:
    """Put the blocks set aside back at their placeholders: those the search may read
    (``searchable``), or those marked ``data-search-exclude``."""
    if not blocks:
        return html
    used: set[int] = set()

    def block_for(m: re.Match) -> str:
        i = int(m.group(1))
        if i >= len(blocks) or i in used:        # only the first placeholder of a block
            return m.group(0)
        block = blocks[i]
        if ("data-search-exclude" not in block.split(">", 1)[0]) != searchable:
            return m.group(0)
        used.add(i)
        return block

    # one pass over the page (a register page has thousands of blocks)
    return _PLACEHOLDER.sub(block_for, html)


_PLACEHOLDER = re.compile(r"<!--xv-block-(\d+)-->")

#: the markers of a part of a page that the site generator is not to read (set_aside_late)
LATE_OPEN, LATE_CLOSE = "<!--xv-late-->", "<!--/xv-late-->"
_LATE_PLACEHOLDER = re.compile(r"<!--xv-late-(\d+)-->")


def set_aside_late(markdown: str) -> tuple[str, list[str]]:
    r"""Replace each part between ``<!--xv-late-->`` and ``<!--/xv-late-->`` (markers
    included) by a placeholder comment: (text, parts).

    A template marks so a part that is finished HTML, that nobody searches for and that is
    large: the number register's citation lines (tens of megabytes for hundreds of studies).
    The generator then never reads, converts or parses it; the part is put back, as it was,
    into the finished page (:func:`put_back_late`), which is what Python-Markdown itself
    gives for a raw HTML part standing between blank lines (tests/test_site_build.py). Found
    with plain string searches, not line by line.

    >>> set_aside_late("a\n\n<!--xv-late-->\n<div>x</div>\n<!--/xv-late-->\n\nb")
    ('a\n\n<!--xv-late-0-->\n\nb', ['<!--xv-late-->\n<div>x</div>\n<!--/xv-late-->'])
    """
    out: list[str] = []
    parts: list[str] = []
    at = 0
    while (start := markdown.find(LATE_OPEN, at)) >= 0:
        end = markdown.find(LATE_CLOSE, start)
        if end < 0:
            break                     # never closed: left for the generator, as it is
        end += len(LATE_CLOSE)
        out += [markdown[at:start], f"<!--xv-late-{len(parts)}-->"]
        parts.append(markdown[start:end])
        at = end
    out.append(markdown[at:])
    return "".join(out), parts


def put_back_late(html: str, parts) -> str:
    """The parts set aside by :func:`set_aside_late` back at their placeholders."""
    if not parts:
        return html
    return _LATE_PLACEHOLDER.sub(
        lambda m: parts[int(m.group(1))] if int(m.group(1)) < len(parts) else m.group(0), html)


def docs_dir(config_file: Path) -> Path:
    """The folder MkDocs reads (the templates and CSS), from mkdocs.yml."""
    try:
        cfg = _load_config(config_file=str(config_file))
    except MkDocsException as exc:
        raise site.SiteBuildError(f"{config_file}: {exc}") from None
    return Path(cfg.docs_dir)


class _Collect(logging.Handler):
    """Keeps the generator's warnings, to report them with the failure they cause."""

    def __init__(self):
        super().__init__(logging.WARNING)
        self.lines: list[str] = []

    def emit(self, record):
        self.lines.append(_ANSI.sub("", record.getMessage()).strip())


_ANSI = re.compile(r"\x1b\[[0-9;]*m")


def build_site(config_file: Path, site_dir: Path, prepared: site.Prepared,
               docs_dir: Path | None = None) -> None:
    """Build the site from ``prepared`` into ``site_dir`` with MkDocs in strict mode
    (``docs_dir``, when given, in place of the configuration's)."""
    logger = logging.getLogger("mkdocs")
    collect = _Collect()
    logger.addHandler(collect)
    try:
        cfg = _load_config(config_file=str(config_file), site_dir=str(site_dir), strict=True,
                           **_docs_dir_option(docs_dir))
        plugin = cfg.plugins.get(PLUGIN)
        if plugin is None:
            raise site.SiteBuildError(f"{config_file}: the '{PLUGIN}' plugin is not listed "
                                      "under plugins:; the dossier pages come from it")
        plugin.prepared = prepared
        with _reusing_pages(cfg, plugin, prepared):
            _mkdocs_build(cfg)
    except MkDocsException as exc:
        found = "".join(f"\n  warning: {line}" for line in collect.lines)
        raise site.SiteBuildError(f"the site generator stopped: {exc}{found}") from None
    finally:
        logger.removeHandler(collect)


def _search_entries(cfg) -> list | None:
    """The search plugin's list of index entries (None without a search plugin)."""
    for plugin in cfg.plugins.values():
        index = getattr(plugin, "search_index", None)
        if index is not None and isinstance(getattr(index, "entries", None), list):
            return index.entries
    return None


@contextlib.contextmanager
def _reusing_pages(cfg, plugin: DossierPlugin, prepared: site.Prepared):
    """During one build, pages whose finished HTML the cache holds are written from it (the
    generator neither converts their Markdown nor renders its theme around them, and their
    search-index entries come from the cache too); every other page of ``prepared.page_keys``
    is kept in the cache once the generator has written it. Either way the file is written
    with this build's version and date in place of the tokens.

    MkDocs has no incremental build of its own; this wraps its two per-page steps
    (``_populate_page``, ``_build_page``) for the length of the build and puts them back
    after. A page made from the cache is the same bytes a full build writes
    (tests/test_site_build.py); its links were checked when it was first built, with the
    same navigation and list of files (both are in its key).
    """
    cache, keys, reused = prepared.page_cache, prepared.page_keys, prepared.reused
    populate = getattr(_mkdocs_build_module, "_populate_page", None)
    build_page = getattr(_mkdocs_build_module, "_build_page", None)
    if cache is None or populate is None or build_page is None:
        yield
        return
    tokens, kept = prepared.tokens, reused
    studies = {study_page_path(o.study_id): o.study_id for o in prepared.outcomes}
    plugin._print_bodies.clear()

    def keep_print_body(uri: str, html: bytes) -> None:
        """The study's body of the print page, kept with its page (its key)."""
        study_id = studies.get(uri)
        if study_id is None:
            return
        body = cache.get_print(uri, keys[uri])
        if body is None:
            try:
                body = _print_body(study_id, html.decode("utf-8"))
            except ValueError:
                return          # _print_page makes it from the written page and says why
            cache.put_print(uri, keys[uri], body)
        plugin._print_bodies[study_id] = body

    def populate_page(page, config, files, dirty=False):
        if page.file.src_uri in kept:
            return None
        return populate(page, config, files, dirty)

    def write(page, html: bytes) -> None:
        dest = page.file.abs_dest_path
        os.makedirs(os.path.dirname(dest), exist_ok=True)
        with open(dest, "wb") as fh:
            fh.write(site.put_tokens(html, tokens))
        plugin._done.add(str(Path(dest)))

    def build_one(page, config, doc_files, nav, env, dirty=False, excluded=False):
        uri = page.file.src_uri
        entries = _search_entries(config)
        if uri in kept:
            html, found = kept[uri]
            write(page, html)
            keep_print_body(uri, html)
            if entries is not None:
                entries.extend(found)
            return None
        n0 = len(entries) if entries is not None else 0
        out = build_page(page, config, doc_files, nav, env, dirty, excluded)
        if uri in keys and os.path.isfile(page.file.abs_dest_path):
            with open(page.file.abs_dest_path, "rb") as fh:
                html = fh.read()
            cache.put(uri, keys[uri], html, [] if entries is None else entries[n0:])
            write(page, html)
            keep_print_body(uri, html)
        return out

    _mkdocs_build_module._populate_page = populate_page
    _mkdocs_build_module._build_page = build_one
    try:
        yield
    finally:
        _mkdocs_build_module._populate_page = populate
        _mkdocs_build_module._build_page = build_page


def _docs_dir_option(docs_dir: Path | None) -> dict[str, str]:
    return {} if docs_dir is None else {"docs_dir": str(docs_dir)}


def serve(config_file: Path, studies: Path, addr: str, docs_dir: Path | None = None,
          cache_dir: Path | None = None) -> None:
    """Live preview: rebuild whenever a study file, template or the CSS changes."""
    from mkdocs.commands.serve import serve as _serve

    os.environ[ENV_STUDIES] = str(studies)
    if cache_dir is not None:
        os.environ[site.ENV_CACHE] = str(cache_dir)
    os.environ[ENV_KEEP_GOING] = "1"      # a broken study shows its errors page while editing
    logging.getLogger("mkdocs").setLevel(logging.INFO)
    if not logging.getLogger("mkdocs").handlers:
        handler = logging.StreamHandler()
        handler.setFormatter(logging.Formatter("%(levelname)-7s -  %(message)s"))
        logging.getLogger("mkdocs").addHandler(handler)
    try:
        _serve(config_file=str(config_file), dev_addr=addr, livereload=True,
               watch=[str(studies)], **_docs_dir_option(docs_dir))
    except MkDocsException as exc:
        raise site.SiteBuildError(f"the preview server stopped: {exc}") from None
    except OSError as exc:
        raise site.SiteBuildError(f"{addr}: cannot serve there ({exc.strerror or exc}); "
                                  "choose another --addr") from None
