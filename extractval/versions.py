"""Published versions: every build keeps its results under ``versions/<dossier-version>/`` in
the site (results.json, results.csv and register.html, a page of its citation lines), carries
forward every version already published (from the previous site and from an archive folder)
and adds a Changes page comparing it with the previous published version."""

from __future__ import annotations

import html
import json
import os
import re
from pathlib import Path

from .compare import compare

VERSIONS = "versions"
CHANGES = "changes.md"
#: what each version folder holds
KEPT = ("results.json", "results.csv", "register.html")
_VERSION = re.compile(r"dv-[0-9a-f]{12}")
MARKER = ".extractval-dossier"


def register_html(doc: dict) -> bytes:
    """A self-contained page of one version's citation lines, anchored at the identifiers."""
    e = html.escape
    v = doc.get("dossier_version", "")
    lines = [
        "<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
        f"<title>Number register, dossier {e(v)}</title>",
        "<style>body{font:15px/1.45 system-ui,sans-serif;max-width:60rem;margin:2rem auto;"
        "padding:0 1rem;color:#1d2833}code{font-size:.92em}p.reg{margin:0;padding:.25em;"
        "border-bottom:1px solid #d6dde3}p.reg:target{background:#fbe3cf}"
        "table{border-collapse:collapse}td,th{border:1px solid #d6dde3;padding:.2em .6em}"
        "</style></head><body>",
        f"<h1>Number register of dossier {e(v)}</h1>",
        f"<p>Built {e(doc.get('build_date', ''))} by {e(doc.get('software', ''))}. This page "
        "and the results.json and results.csv beside it are the record of this version; they "
        "are carried unchanged into every later build of the dossier.</p>",
        "<table><tr><th>Study</th><th>Inputs key</th><th>Status</th></tr>"]
    for s in doc.get("studies", []):
        lines.append(f"<tr><td>{e(s['study'])}</td><td><code>{e(s.get('inputs_key', ''))}"
                     f"</code></td><td>{e(str(s.get('status', '')))}</td></tr>")
    lines.append("</table>")
    for r in doc.get("numbers", []):
        lines.append(f'<p class="reg" id="{e(r["id"], quote=True)}"><code>'
                     f"{e(r['citation'])}</code></p>")
    lines.append("</body></html>")
    return ("\n".join(lines) + "\n").encode("utf-8")


def _read_versions(folder: Path | None) -> dict[str, dict[str, Path]]:
    """Each version's files there (not read: a version is tens of megabytes, and a build
    links or copies them unchanged)."""
    found: dict[str, dict[str, Path]] = {}
    if folder is None or not folder.is_dir():
        return found
    for d in sorted(folder.iterdir()):
        if d.is_dir() and _VERSION.fullmatch(d.name) and (d / "results.json").is_file():
            found[d.name] = {n: d / n for n in KEPT if (d / n).is_file()}
    return found


def _bytes(data: bytes | Path) -> bytes:
    return data.read_bytes() if isinstance(data, Path) else data


def published(site_dir: Path | None, archive: Path | None) -> dict[str, dict[str, Path]]:
    """Every version already published: the site's versions/ and the archive (the archive's
    copy wins where both hold one, as it is the one kept outside the site)."""
    out = _read_versions(None if site_dir is None else Path(site_dir) / VERSIONS)
    out.update(_read_versions(archive))
    return out


#: the head of a results.json as :func:`extractval.report.register.results_json` writes it
_HEAD = re.compile(rb'\{\s*"dossier_version": "[^"\\]*",\s*"software": "[^"\\]*",'
                   rb'\s*"build_date": "([^"\\]*)"')


def _date(files: dict[str, bytes | Path]) -> str:
    """A version's build date, read off the head of its results.json (which can be tens of
    megabytes) when it has the usual layout, else from the whole document."""
    data = files.get("results.json")
    if data is None:
        return ""
    if isinstance(data, Path):
        try:
            with open(data, "rb") as fh:
                head = fh.read(4096)
        except OSError:
            return ""
        m = _HEAD.match(head)
        if m:
            return m.group(1).decode("ascii", "replace")
        data = _bytes(data)
    m = _HEAD.match(data, 0, 4096)
    if m:
        return m.group(1).decode("ascii", "replace")
    try:
        return json.loads(data).get("build_date", "")
    except (ValueError, AttributeError):
        return ""


#: results.json documents read ahead (read_ahead), by path, with the file's size and time
_READ: dict[Path, tuple[tuple[int, int, int], dict]] = {}


def _signature(path: Path) -> tuple[int, int, int]:
    st = path.stat()
    return st.st_ino, st.st_size, st.st_mtime_ns


def read_ahead(site_dir: Path | None) -> None:
    """Parse the results.json of the version the published site shows, which the next
    add_versions compares with (a build calls this while its studies are being fitted)."""
    if site_dir is None:
        return
    try:
        shown = (Path(site_dir) / MARKER).read_text(encoding="utf-8").strip()
        if not _VERSION.fullmatch(shown):
            return
        path = Path(site_dir) / VERSIONS / shown / "results.json"
        _READ.clear()
        _READ[path] = (_signature(path), json.loads(path.read_bytes()))
    except (OSError, ValueError):
        _READ.clear()


def _document(data: bytes | Path) -> dict:
    """A results.json document: read ahead when it was, and is still the same file."""
    if isinstance(data, Path):
        got = _READ.pop(data, None)
        try:
            if got is not None and got[0] == _signature(data):
                return got[1]
        except OSError:
            pass
    return json.loads(_bytes(data))


def previous_version(site_dir: Path | None, earlier: dict[str, dict[str, bytes]],
                     current: str) -> str | None:
    """The version the published site shows (its marker), else the newest other one kept."""
    if site_dir is not None:
        try:
            shown = (Path(site_dir) / MARKER).read_text(encoding="utf-8").strip()
        except OSError:
            shown = ""
        if shown in earlier and shown != current:
            return shown
    others = sorted((v for v in earlier if v != current), key=lambda v: (_date(earlier[v]), v))
    return others[-1] if others else None


def add_versions(files: dict[str, bytes], nav: list, site_dir: Path | None,
                 archive: Path | None, render_changes,
                 linked: dict[str, Path] | None = None) -> dict[str, bytes | Path]:
    """Put this version and every earlier one under versions/ and the Changes page into
    ``files`` (and the page into ``nav``). A version already published keeps its first
    files: a cited version never changes. With ``linked``, the files of versions already
    published go there (site path -> the file on disk) instead of being read into
    ``files``. Returns this version's files (for the archive)."""
    doc = json.loads(files["results.json"])
    current = doc["dossier_version"]
    earlier = published(site_dir, archive)
    own = earlier.get(current) or {"results.json": files["results.json"],
                                   "results.csv": files["results.csv"],
                                   "register.html": register_html(doc)}
    for v, kept in sorted(earlier.items()) + [(current, own)]:
        for name, data in kept.items():
            path = f"{VERSIONS}/{v}/{name}"
            if isinstance(data, Path) and linked is not None:
                linked[path] = data
                files.pop(path, None)
            else:
                files[path] = _bytes(data)
                if linked is not None:
                    linked.pop(path, None)
    prev = previous_version(site_dir, earlier, current)
    comparison = (compare(_document(earlier[prev]["results.json"]), doc)
                  if prev is not None else None)
    _READ.clear()
    listing = sorted(({"version": v, "date": _date(k)} for v, k in
                      {**earlier, current: own}.items()),
                     key=lambda x: (x["date"], x["version"]), reverse=True)
    files[CHANGES] = render_changes(comparison, listing, current).encode("utf-8")
    at = next((i for i, item in enumerate(nav) if "About this dossier" in item), len(nav))
    nav.insert(at, {"Changes and versions": CHANGES})
    return own


def archive_version(archive: Path, version: str, own: dict[str, bytes | Path]) -> None:
    """Copy this version's files into ``archive/<version>/``; a version already there is left
    as it is (the first publication is the record)."""
    target = Path(archive) / version
    if (target / "results.json").is_file():
        return
    tmp = Path(archive) / f".{version}.tmp-{os.getpid()}"
    tmp.mkdir(parents=True, exist_ok=True)
    for name, data in own.items():
        (tmp / name).write_bytes(_bytes(data))
    os.replace(tmp, target)
