"""Read a runs table (CSV, XLSX or ODS) into rows that remember where they came from.

The reader knows nothing of shake flasks: it finds the header, skips fully blank rows, turns
number-looking cells into floats and keeps each cell's text as written, so that the study layer
can say "line 7, column 'pH': found '7.2.5'". Problems are returned, never raised, and a file
that cannot be read at all (binary, not UTF-8, a broken workbook) is one located problem.

Rules for numbers
-----------------
* CSV: the separator is sniffed among ``,`` ``;`` and tab (an Excel ``sep=`` first line wins).
  A file separated by ``;`` or tab whose cells hold numbers such as ``7,25`` uses the decimal
  comma: there ``7,25`` reads 7.25, and a dotted ``7.25`` stays text (in such a file ``1.250``
  may mean one thousand two hundred and fifty, so it is not guessed). In a ``,`` file, or a
  ``;`` file without decimal commas, numbers use the decimal point.
* Sheets: numeric cells are numbers; a cell formatted as a percentage is read as the percentage
  it shows (0.95 shown as 95 % reads 95.0); text cells that spell a number with a decimal point
  are numbers too; other text stays text. Booleans and dates stay text.
* ``nan``, ``inf`` and thousands separators are never numbers.

Rows that do not line up
------------------------
In a ``,``-separated CSV a decimal comma splits a number (``R10,3,98,...`` is pH 3 and 98 mL),
and every later cell moves one column right, often into optional columns that accept anything.
So there a row with more cells than the header is an error naming the two cells that may be
one number; a row with fewer cells is the usual hand-typed row that leaves out its empty end,
and is refused only when it writes no decimal point and two neighbouring whole numbers could be
one split number. Such a row is kept as ``misaligned`` and its cells are not read.

The header
----------
The header is the first non-blank row, or the row :class:`HeaderRules` names. When the caller
gives the expected names and the first row holds fewer than two of them while a row below
holds three or more, the table is refused with the row where the header seems to be (a title
or a merged title cell above the header).

Size limits
-----------
A shake-flask study has tens of runs (OECD TG 107: three volume ratios in duplicate at each
pH). A table longer than :data:`MAX_ROWS` rows is almost certainly the wrong file (an instrument
log, an export of many studies): it is refused with one located problem before its cells are
parsed, so that memory stays bounded whatever the file. A CSV is measured by its lines, counted
on the bytes before anything is decoded. An XLSX sheet is streamed and reading stops at the
first row holding data beyond the limit (blank formatted rows do not count); openpyxl first
looks for the sheet's stated size, and a sheet written without one (Excel writes it, some
streaming writers do not) is scanned once by openpyxl, in time growing with its rows but not in
memory. An ODS file is built whole by odfpy, so the row elements of all its sheets are
counted in the streamed XML first. Files above :data:`MAX_BYTES` are not read at all.
"""

from __future__ import annotations

import codecs
import csv
import hashlib
import io
import math
import re
from dataclasses import dataclass, field, replace
from decimal import Decimal
from pathlib import Path

from .errors import Problem, place_text

Cell = str | float | None

#: CSV separators tried by the sniffer, in order of preference on a tie.
SEPARATORS = (";", "\t", ",")
#: File name endings the reader understands.
EXTENSIONS = (".csv", ".xlsx", ".ods")
#: Most rows (CSV lines, sheet rows) a runs table may have, header and blank rows included.
MAX_ROWS = 5000
#: Largest runs-table file read, [bytes]; a table of MAX_ROWS runs is well below 1 MB.
MAX_BYTES = 32 * 2**20
#: Largest uncompressed sheet XML of an ODS file, [bytes]: odfpy builds the whole document.
_MAX_ODS_XML_BYTES = 8 * MAX_BYTES

_POINT_NUMBER = re.compile(r"^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?$")
_COMMA_NUMBER = re.compile(r"^[+-]?(?:\d+(?:,\d*)?|,\d+)(?:[eE][+-]?\d+)?$")
_COMMA_DECIMAL = re.compile(r"^[+-]?\d*,\d+(?:[eE][+-]?\d+)?$")   # a comma is present
_SEP_LINE = re.compile(r"^\s*sep=(.)\s*$", re.IGNORECASE)


@dataclass(frozen=True)
class Location:
    """Where a record came from: a display path and a 1-based text line or sheet row."""

    file: str
    line: int | None = None
    row: int | None = None
    sheet: str | None = None

    def where(self) -> dict:
        return {k: v for k, v in
                dict(file=self.file, line=self.line, row=self.row, sheet=self.sheet).items()
                if v is not None}

    def __str__(self) -> str:
        return place_text(self.file, self.sheet, self.line, self.row)


@dataclass(frozen=True)
class TableRow:
    """One non-blank data row.

    ``cells`` maps each normalised column name (see :func:`normalise_header`) to a float, a
    text or None (empty); ``text`` maps it to the cell as written ("" when empty), for messages
    and for text columns such as run ids (a sheet's 7 is "7", never "7.0").
    """

    cells: dict[str, Cell]
    location: Location
    text: dict[str, str] = field(default_factory=dict)
    #: the cells do not line up with the header (a ','-separated row with a cell count off,
    #: see :func:`_misaligned`); already reported, so a reader should not read it as a record
    misaligned: bool = False

    def raw(self, column: str) -> str:
        return self.text.get(column, "")


@dataclass(frozen=True)
class Table:
    """A runs table: normalised column names in file order, the header as written, the rows."""

    file: str                          # display path
    columns: tuple[str, ...]           # normalised names, in the order of the file
    rows: tuple[TableRow, ...]
    header_location: Location
    headers: dict[str, str] = field(default_factory=dict)   # normalised -> as written
    kind: str = "csv"                  # "csv" | "xlsx" | "ods"
    separator: str | None = None       # CSV only
    decimal_comma: bool = False        # CSV only
    sheet: str | None = None           # sheets only
    sha256: str | None = None          # of the file's bytes

    def header(self, column: str) -> str:
        """The header as the file spells it (``PH`` stays ``PH``), else the given name."""
        return self.headers.get(column, column)


def normalise_header(name: str) -> str:
    """Header names match case-insensitively with surrounding spaces ignored.

    >>> normalise_header("  pH "), normalise_header("Found_Organic")
    ('ph', 'found_organic')
    """
    return name.strip().lower()


def parse_number(text: str, decimal_comma: bool = False) -> float | None:
    """The number a cell spells, or None when it spells none (text, nan, thousands marks).

    >>> parse_number("7,25", decimal_comma=True), parse_number("7,25"), parse_number("-1e-3")
    (7.25, None, -0.001)
    >>> parse_number("7.25", decimal_comma=True), parse_number("nan"), parse_number("1e400")
    (None, None, None)
    """
    s = text.strip()
    if decimal_comma:
        if not _COMMA_NUMBER.match(s):
            return None
        s = s.replace(",", ".")
    elif not _POINT_NUMBER.match(s):
        return None
    value = float(s)
    return value if math.isfinite(value) else None


def format_number(value: float) -> str:
    """A sheet's number as people read it: 7 not 7.0, 7.25 as 7.25.

    >>> format_number(7.0), format_number(7.25), format_number(1e-05)
    ('7', '7.25', '1e-05')
    """
    if value == int(value) and abs(value) < 1e15:
        return str(int(value))
    return repr(float(value))


@dataclass(frozen=True)
class HeaderRules:
    """Where the header is and what it should hold, for the header checks of :func:`_build`.

    ``row`` is the 1-based line (CSV) or sheet row of the header, None for the first non-blank
    row; ``names`` are normalised column names the header is expected to hold (a header found
    further down is then reported, see :func:`_header_further_down`); ``id_column`` names the
    column whose cell identifies a row in messages (the run id).
    """

    row: int | None = None
    names: frozenset[str] = frozenset()
    id_column: str | None = None


def read_table(path, display: str | None = None, sheet: str | None = None,
               rules: HeaderRules | None = None) -> tuple[Table | None, list[Problem]]:
    """Read ``path`` by its extension; return the table (None if unreadable) and the problems.

    ``display`` is the path shown in messages (default: ``path`` as given); ``sheet`` picks a
    sheet by name in a workbook (default: the first); ``rules`` say where the header is and
    what it holds (default: the first non-blank row). Never raises for bad content.
    """
    rules = rules or HeaderRules()
    path = Path(path)
    shown = display if display is not None else str(path)
    ext = path.suffix.lower()
    if ext not in EXTENSIONS:
        return None, [Problem("unsupported runs table type", file=shown, found=path.suffix or
                              "(no extension)", expected=", ".join(EXTENSIONS))]
    try:
        size = path.stat().st_size
        if size > MAX_BYTES:
            return None, [Problem("the runs table file is too large to be one study's runs",
                                  file=shown, found=f"{size} bytes",
                                  expected=f"at most {MAX_BYTES} bytes ({MAX_ROWS} rows at "
                                           "most; one study per runs table)")]
        data = path.read_bytes()
    except OSError as exc:
        return None, [Problem(f"cannot read the runs table: {exc.strerror or exc}", file=shown)]
    digest = hashlib.sha256(data).hexdigest()
    problems: list[Problem] = []
    if ext == ".csv":
        if sheet is not None:
            problems.append(Problem("a sheet name was given but the runs table is a CSV file; "
                                    "the sheet name is ignored", file=shown, found=sheet,
                                    expected="no sheet for a CSV file", severity="warning"))
        table, more = read_csv_bytes(data, shown, rules)
    elif ext == ".xlsx":
        table, more = _read_xlsx(data, shown, sheet, rules)
    else:
        table, more = _read_ods(data, shown, sheet, rules)
    problems.extend(more)
    if table is not None:
        table = replace(table, sha256=digest)
    return table, problems


# -- CSV ------------------------------------------------------------------------------------------

def _not_text(shown: str, why: str, line: int | None = None) -> Problem:
    return Problem(f"not a text table: {why}", file=shown, line=line,
                   expected="a CSV text file in UTF-8 (e.g. 'CSV UTF-8' from a spreadsheet), "
                            "or an .xlsx/.ods workbook")


def decode_text(data: bytes, shown: str) -> tuple[str | None, list[Problem]]:
    """UTF-8 text (a leading BOM dropped), or a located 'not a text table' problem."""
    if data.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
        return None, [_not_text(shown, "the file is UTF-16 encoded ('Unicode text')")]
    if data.startswith(b"PK\x03\x04"):
        return None, [_not_text(shown, "the file is a zip archive, probably a workbook saved "
                                       "under a .csv name")]
    nul = data.find(b"\x00")
    if nul >= 0:
        return None, [_not_text(shown, f"binary content (a NUL byte at byte {nul})",
                                line=data.count(b"\n", 0, nul) + 1)]
    try:
        return data.decode("utf-8-sig"), []
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        return None, [_not_text(shown, f"byte {exc.start} (0x{data[exc.start]:02x}) is not "
                                       "valid UTF-8", line=line)]


def _sniff_separator(lines: list[str]) -> str:
    """The separator that splits the header into most fields, data rows agreeing on a tie.

    Leading lines that no separator splits (a title line above the header) are passed over.
    """
    best, best_score = ",", (0, 0)
    for sep in SEPARATORS:
        rows = list(csv.reader(lines, delimiter=sep))
        rows = [r for r in rows if any(c.strip() for c in r)]
        while len(rows) > 1 and len(rows[0]) == 1:
            rows = rows[1:]
        if not rows:
            continue
        width = len(rows[0])
        agree = sum(len(r) == width for r in rows[1:])
        score = (width, agree)
        if width > 1 and score > best_score:
            best, best_score = sep, score
    return best


def too_long(shown: str, found: str, unit: str, **where) -> Problem:
    """The located problem of a table beyond :data:`MAX_ROWS`."""
    return Problem(f"the runs table is too long for one study's runs (at most {MAX_ROWS} "
                   f"{unit}s are read)", file=shown, found=found,
                   expected=f"at most {MAX_ROWS} {unit}s, header included: a shake-flask study "
                            "has tens of runs, and each study has its own runs table", **where)


def count_lines(data: bytes) -> int:
    """Physical lines of CSV bytes as the reader splits them (``\\n``, ``\\r\\n`` or
    ``\\r`` ends a line), counted without decoding.

    >>> count_lines(b"a\\nb\\r\\nc\\rd"), count_lines(b"a\\n"), count_lines(b"")
    (4, 1, 0)
    """
    breaks = data.count(b"\n") + data.count(b"\r") - data.count(b"\r\n")
    return breaks + (1 if data and not data.endswith((b"\n", b"\r")) else 0)


def read_csv_bytes(data: bytes, shown: str,
                   rules: HeaderRules | None = None) -> tuple[Table | None, list[Problem]]:
    """Parse CSV bytes; lines are 1-based physical lines (a BOM or ``sep=`` line counts)."""
    rules = rules or HeaderRules()
    n_lines = count_lines(data)
    if n_lines > MAX_ROWS:
        return None, [too_long(shown, f"{n_lines} lines", "line", line=MAX_ROWS + 1)]
    text, problems = decode_text(data, shown)
    if text is None:
        return None, problems
    lines = text.splitlines(keepends=True)
    first_data = 0
    separator = None
    if lines:
        m = _SEP_LINE.match(lines[0])
        if m and m.group(1) in SEPARATORS:
            separator, first_data = m.group(1), 1
    body = lines[first_data:]
    if separator is None:
        start = max(0, (rules.row or 1) - 1 - first_data)
        separator = _sniff_separator(body[start:start + 50])

    records: list[tuple[int, list[str]]] = []
    # strict: a quote left open must not swallow the rest of the file into one cell
    reader = csv.reader(io.StringIO("".join(body), newline=""), delimiter=separator,
                        strict=True)
    previous = 0
    try:
        for fields in reader:
            records.append((first_data + previous + 1, [f.strip() for f in fields]))
            previous = reader.line_num
    except csv.Error as exc:
        problems.append(Problem(f"the CSV cannot be parsed in the row starting here: {exc}",
                                file=shown, line=first_data + previous + 1,
                                expected="well-formed CSV: a quoted cell closes its quote, "
                                         f"and is followed by {separator!r} or the line end"))
        return None, problems

    decimal_comma = separator != "," and any(
        _COMMA_DECIMAL.match(c) for _, fields in records for c in fields)
    hint = (": a decimal comma in a ','-separated file splits a number in two; separate "
            "the cells with ';', or quote such numbers" if separator == "," else "")
    table, more = _build(records, shown, kind="csv",
                         convert=lambda s: _convert_text(s, decimal_comma),
                         located=lambda n: Location(shown, line=n), surplus_hint=hint,
                         rules=rules, same_width=separator == ",")
    problems.extend(more)
    if table is None:
        return None, problems
    return replace(table, separator=separator, decimal_comma=decimal_comma), problems


def _convert_text(s: str, decimal_comma: bool) -> tuple[Cell, str]:
    if s == "":
        return None, ""
    number = parse_number(s, decimal_comma)
    return (s if number is None else number), s


# -- shared: header, blank rows, cells beyond the header -----------------------------------------

def _build(records, shown: str, *, kind: str, convert, located, sheet: str | None = None,
           surplus_hint: str = "", rules: HeaderRules | None = None,
           same_width: bool = False) -> tuple[Table | None, list[Problem]]:
    """Turn (line-or-row number, raw cells) records into a Table.

    ``convert`` maps one raw cell to (value, text); ``located`` maps a number to a Location;
    ``surplus_hint`` is added to the message about data beyond the header's last column;
    ``rules`` place and check the header; ``same_width`` (a ','-separated CSV) makes a row
    whose cell count differs from the header's an error (see :func:`_misaligned`).
    """
    rules = rules or HeaderRules()
    problems: list[Problem] = []
    converted = []
    for number, raw in records:
        cells = [convert(c) for c in raw]
        if any(v is not None for v, _ in cells):
            converted.append((number, cells))
    if not converted:
        where = {k: v for k, v in located(1).where().items() if k in ("file", "sheet")}
        problems.append(Problem("the runs table is empty: no header row", **where,
                                expected="a header row naming the columns, then one row per run"))
        return None, problems
    unit = "line" if kind == "csv" else "row"
    if rules.row is not None:
        at = [i for i, (number, _) in enumerate(converted) if number == rules.row]
        if not at:
            where = {k: v for k, v in located(rules.row).where().items()
                     if k in ("file", "sheet")}
            first = converted[0][0]
            problems.append(Problem(
                f"header_row in study.yaml points at {unit} {rules.row}, which holds no "
                "cells", **where, found=f"header_row: {rules.row}",
                expected=f"the {unit} number of the header (the first {unit} with cells is "
                         f"{first})"))
            return None, problems
        # the rows above the header are a title or notes, by the study's own declaration
        converted = converted[at[0]:]
    elif rules.names:
        moved = _header_further_down(converted, rules.names)
        if moved is not None:
            first = converted[0][0]
            problems.append(Problem(
                f"the header seems to be on {unit} {moved}, not on {unit} {first} (a title "
                f"or a merged cell above it?); set `header_row: {moved}` in study.yaml",
                **located(first).where(), found=_joined([t for _, t in converted[0][1]]),
                expected=f"the header (run, pH, ...) on the first {unit} with cells, or "
                         "header_row in study.yaml"))
            return None, problems

    header_no, header_cells = converted[0]
    header_loc = located(header_no)
    names: list[str | None] = []
    headers: dict[str, str] = {}
    for value, text in header_cells:
        if value is None:
            names.append(None)
            continue
        name = normalise_header(text)
        if name in headers:
            problems.append(Problem("the same column appears twice in the header",
                                    **header_loc.where(), column=text,
                                    found=f"{headers[name]!r} and {text!r}",
                                    expected="each column once (names ignore case and spaces)"))
            names.append(None)
            continue
        headers[name] = text
        names.append(name)

    rows: list[TableRow] = []
    reported_unnamed: set[int] = set()
    width = len(header_cells)
    for number, cells in converted[1:]:
        loc = located(number)
        values: dict[str, Cell] = {n: None for n in headers}
        texts: dict[str, str] = {n: "" for n in headers}
        shifted = _misaligned([t for _, t in cells], names, headers, width, unit,
                              header_no) if same_width else None
        if shifted is not None:
            ident = None
            if rules.id_column in names:
                at = names.index(rules.id_column)
                ident = cells[at][1] or None if at < len(cells) else None
            problems.append(replace(shifted, **loc.where(), run=ident))
            rows.append(TableRow(values, loc, texts, misaligned=True))
            continue
        for i, (value, text) in enumerate(cells):
            name = names[i] if i < len(names) else None
            if name is None:
                if value is not None and i not in reported_unnamed:
                    reported_unnamed.add(i)
                    beyond = i >= len(names)
                    problems.append(Problem(
                        ("the row has more cells than the header has names" + surplus_hint
                         if beyond else "a cell holds data in a column without a header")
                        + " (reported once per column)", **loc.where(),
                        column=_column_label(kind, i), found=text,
                        expected="a header name above every column that holds data"))
                continue
            values[name], texts[name] = value, text
        rows.append(TableRow(values, loc, texts))
    table = Table(shown, tuple(headers), tuple(rows), header_loc, headers, kind, sheet=sheet)
    return table, problems


_INTEGER = re.compile(r"^[+-]?\d+$")
_DIGITS = re.compile(r"^\d+$")


def _joined(texts: list[str], limit: int = 120) -> str:
    """A row's cells as the file writes them, shortened for a message."""
    line = ",".join(texts)
    return line if len(line) <= limit else line[:limit - 3] + "..."


def _splits(texts: list[str]) -> list[tuple[int, str]]:
    """Neighbouring cells that read as one number with a decimal comma: (index, 'a,b')."""
    return [(i, f"{a},{b}") for i, (a, b) in enumerate(zip(texts, texts[1:]))
            if _INTEGER.match(a) and _DIGITS.match(b)]


def _misaligned(texts: list[str], names: list, headers: dict, width: int, unit: str,
                header_no: int) -> Problem | None:
    """The problem of a ','-separated row whose cell count differs from the header's.

    Every row a spreadsheet writes has the header's cell count. More cells mean something
    split a cell (a decimal comma: ``3,98`` is two cells), so every cell after it sits under
    the wrong column. Fewer cells are the usual hand-typed row that leaves out empty cells at
    its end, harmless unless two neighbouring whole numbers could be one split number (``3``
    and ``98``) and no cell of the row writes a decimal point: then a split and an omission
    may cancel out, and the row is refused too.
    """
    n = len(texts)
    # text beyond the header's last column is not the tail of a split number
    surplus_text = any(t and parse_number(t) is None for t in texts[width:])
    splits = [] if surplus_text else _splits(texts)
    # a short row that writes a decimal point is taken to write its decimals with points
    if n == width or (n < width and (not splits or any("." in t for t in texts))):
        return None

    def column(i: int) -> str:
        name = names[i] if i < len(names) else None
        return headers[name] if name else f"field {i + 1}"

    if splits:
        i, joined = splits[0]
        maybe = (f"; perhaps the cells under {column(i)!r} and {column(i + 1)!r} "
                 f"({texts[i]!r} and {texts[i + 1]!r}) are one number, "
                 f"{joined.replace(',', '.')}, written with a decimal comma")
    else:
        i, maybe = min(n, width), ""
    fix = ("write decimals with a point, or separate the cells with ';' when decimals are "
           "written with a comma (or quote such numbers: \"3,98\")")
    if n < width:
        fix += (f"; if cells were left out at the end of the row, write one ',' for each "
                f"empty cell so that the row has {width} cells")
    return Problem(
        f"the row has {n} cells but the header ({unit} {header_no}) has {width}: its cells "
        f"may be shifted under the wrong columns, so the row is not read{maybe}",
        column=column(i), found=_joined(texts),
        expected=f"{width} cells, one under each header name: {fix}")


def _header_further_down(converted, names: frozenset[str], look: int = 20) -> int | None:
    """The line or row of a header below the first row, when the first row is not one.

    A first row holding fewer than two of the expected ``names`` while a row among the next
    ``look`` holds at least three is a title row (or a merged title cell) above the header.
    """
    def hits(cells) -> int:
        return sum(normalise_header(t) in names for _, t in cells if t)

    if hits(converted[0][1]) >= 2:
        return None
    for number, cells in converted[1:look + 1]:
        if hits(cells) >= 3:
            return number
    return None


def _column_label(kind: str, index: int) -> str:
    """'field 5' for CSV, the spreadsheet letter ('E') for sheets."""
    if kind == "csv":
        return f"field {index + 1}"
    letters, n = "", index + 1
    while n:
        n, rem = divmod(n - 1, 26)
        letters = chr(65 + rem) + letters
    return letters


# -- XLSX -----------------------------------------------------------------------------------------

def _sheet_cell(value, number_format: str | None) -> tuple[Cell, str]:
    """(value, text) of a sheet cell; see the module docstring for the rules."""
    if value is None:
        return None, ""
    if isinstance(value, bool):
        return ("TRUE" if value else "FALSE"), ("TRUE" if value else "FALSE")
    if isinstance(value, (int, float)):
        v = float(value)
        if v != v or v in (float("inf"), float("-inf")):
            return str(value), str(value)
        if number_format and "%" in number_format:
            pct = float(Decimal(repr(v)) * 100)
            return pct, f"{format_number(pct)} %"
        return v, format_number(v)
    if hasattr(value, "isoformat"):
        text = value.isoformat()
        return text, text
    text = str(value).strip()
    if text == "":
        return None, ""
    number = parse_number(text)
    return (text if number is None else number), text


def _pick_sheet(names: list[str], sheet: str | None,
                shown: str) -> tuple[int | None, Problem | None]:
    if not names:
        return None, Problem("the workbook has no worksheet", file=shown,
                             expected="a worksheet holding the runs table")
    if sheet is None:
        return 0, None
    if sheet in names:
        return names.index(sheet), None
    folded = [n for n in names if n.casefold() == sheet.casefold()]
    if len(folded) == 1:
        return names.index(folded[0]), None
    return None, Problem("no sheet of that name in the workbook", file=shown, found=sheet,
                         expected="one of " + ", ".join(repr(n) for n in names))


_XLSX_ROW_TAG = re.compile(rb"<(?:\w+:)?row[\s>/]")
_XLSX_ROW_TAG_LEN = len(b"<row") + 1
_XLSX_HEAD = 1 << 16


def _xlsx_unsized_rows(data: bytes) -> tuple[str, int] | None:
    """The first worksheet that states no size and has more than :data:`MAX_ROWS` row
    elements, as (member name, rows counted), or None.

    A sheet without its ``<dimension>`` (streaming writers leave it out) makes openpyxl read
    the whole sheet while it opens the workbook, before a single row reaches us; such a sheet
    is measured here on its bytes first. Sheets that state their size are left to the reader.
    """
    import zipfile

    try:
        with zipfile.ZipFile(io.BytesIO(data)) as zf:
            for member in sorted(n for n in zf.namelist()
                                 if n.startswith("xl/worksheets/") and n.endswith(".xml")):
                with zf.open(member) as fh:
                    head = fh.read(_XLSX_HEAD)
                data_at = head.find(b"sheetData")
                if b"<dimension" in (head if data_at < 0 else head[:data_at]):
                    continue
                rows, _ = _count_rows(zf, member, _XLSX_ROW_TAG, _XLSX_ROW_TAG_LEN,
                                      _MAX_ODS_XML_BYTES)
                if rows > MAX_ROWS:
                    return member, rows
    except Exception:   # not a zip, a corrupt stream: left to the full reader
        return None
    return None


def _read_xlsx(data: bytes, shown: str, sheet: str | None,
               rules: HeaderRules) -> tuple[Table | None, list[Problem]]:
    import openpyxl

    unsized = _xlsx_unsized_rows(data)
    if unsized is not None:
        return None, [Problem(
            "the workbook is too long to be read as one study's runs: a sheet without a "
            f"stated size ({unsized[0]}) has more rows than a study can have", file=shown,
            found=f"more than {MAX_ROWS} rows", expected=(
                f"at most {MAX_ROWS} rows in each sheet, header included: a shake-flask study "
                "has tens of runs; keep other data in another file"))]
    try:
        wb = openpyxl.load_workbook(io.BytesIO(data), read_only=True, data_only=True)
    except Exception as exc:   # a corrupt workbook can fail anywhere inside the parser
        return None, [Problem(f"not a readable XLSX workbook ({type(exc).__name__}: {exc})",
                              file=shown, expected="an .xlsx workbook saved by a spreadsheet")]
    try:
        names = [ws.title for ws in wb.worksheets]
        index, problem = _pick_sheet(names, sheet, shown)
        if problem:
            return None, [problem]
        ws = wb.worksheets[index]
        declared = ws.max_row    # from the sheet's stated dimensions: for messages only
        ws.reset_dimensions()   # some writers store wrong dimensions; read every row
        records = []
        try:
            for number, cells in enumerate(ws.iter_rows(min_row=1), start=1):
                # blank rows (formatted cells without values) are not kept: a sheet formatted
                # down to its last row must not fill memory
                if not any(c.value is not None for c in cells):
                    continue
                number = next((c.row for c in cells if getattr(c, "row", None)), number)
                if number > MAX_ROWS:
                    found = (f"{declared} rows (the sheet's stated size)"
                             if declared and declared > MAX_ROWS else
                             f"data in row {number}")
                    return None, [too_long(shown, found, "row", sheet=names[index],
                                           row=number)]
                row = [(c.value, getattr(c, "number_format", None)) for c in cells]
                records.append((number, row))
        except Exception as exc:   # broken sheet XML surfaces only while iterating
            return None, [Problem(f"not a readable XLSX workbook ({type(exc).__name__}: {exc})",
                                  file=shown, sheet=names[index],
                                  expected="an .xlsx workbook saved by a spreadsheet")]
    finally:
        wb.close()
    title = names[index]
    return _build(records, shown, kind="xlsx", convert=lambda c: _sheet_cell(*c),
                  located=lambda n: Location(shown, row=n, sheet=title), sheet=title,
                  rules=rules)


# -- ODS ------------------------------------------------------------------------------------------

#: Repeated empty cells and rows are common at the end of a sheet (a million of them): empty
#: rows only advance the row count, and cells are expanded up to this many columns.
_MAX_COLUMNS = 1024


def _ods_cell(cell) -> tuple[Cell, str]:
    from odf import teletype
    from odf.namespaces import OFFICENS, TEXTNS

    vtype = cell.getAttrNS(OFFICENS, "value-type")
    paragraphs = [n for n in cell.childNodes
                  if getattr(n, "qname", None) == (TEXTNS, "p")]
    text = "\n".join(teletype.extractText(p) for p in paragraphs).strip()
    if vtype in ("float", "currency", "percentage"):
        raw = cell.getAttrNS(OFFICENS, "value")
        try:
            v = float(raw)
        except (TypeError, ValueError):
            return (text or raw), (text or str(raw))
        if vtype == "percentage":
            return _sheet_cell(v, "0%")
        return _sheet_cell(v, None)
    if vtype == "boolean":
        flag = cell.getAttrNS(OFFICENS, "boolean-value") == "true"
        return _sheet_cell(flag, None)
    if vtype in ("date", "time"):
        raw = cell.getAttrNS(OFFICENS, f"{vtype}-value") or text
        return (raw or None), raw
    return _sheet_cell(text, None)


def _ods_rows(node):
    """Table rows in document order, through header-row and row-group wrappers."""
    from odf.namespaces import TABLENS

    for child in node.childNodes:
        qname = getattr(child, "qname", None)
        if qname == (TABLENS, "table-row"):
            yield child
        elif qname in ((TABLENS, "table-header-rows"), (TABLENS, "table-row-group"),
                       (TABLENS, "table-rows")):
            yield from _ods_rows(child)


#: a table-row start tag (not table-rows or table-row-group, which wrap rows), and its length
_ODS_ROW_TAG = re.compile(rb"<table:table-row[\s>/]")
_ODS_ROW_TAG_LEN = len(b"<table:table-row") + 1
#: bytes read at a time when streaming a part of a zip archive
_CHUNK = 1 << 20


def _count_rows(zf, member: str, tag: re.Pattern, tag_len: int,
                max_bytes: int) -> tuple[int, int]:
    """(row elements, bytes) of one XML member of a zip, streamed without parsing it.

    Counting stops once either passes its limit (:data:`MAX_ROWS`, ``max_bytes``).
    """
    rows = size = 0
    tail = b""
    with zf.open(member) as fh:
        while rows <= MAX_ROWS and size <= max_bytes:
            chunk = fh.read(_CHUNK)
            if not chunk:
                break
            size += len(chunk)
            block = tail + chunk
            # the tail is one byte shorter than a match: a tag cut by the chunk boundary
            # is counted once, in the block that completes it
            rows += len(tag.findall(block))
            tail = block[-(tag_len - 1):]
    return rows, size


def _ods_size(data: bytes) -> tuple[int, int] | None:
    """(row elements, bytes) of an ODS file's content.xml, streamed without building it;
    None when the archive cannot be read this way (the full reader then reports why).

    Every writer spells the table namespace ``table:``; a file that does not is only read
    without this early check.
    """
    import zipfile

    try:
        with zipfile.ZipFile(io.BytesIO(data)) as zf:
            return _count_rows(zf, "content.xml", _ODS_ROW_TAG, _ODS_ROW_TAG_LEN,
                               _MAX_ODS_XML_BYTES)
    except Exception:   # not a zip, no content.xml, a corrupt stream: left to the full reader
        return None


def _read_ods(data: bytes, shown: str, sheet: str | None,
              rules: HeaderRules) -> tuple[Table | None, list[Problem]]:
    from odf.namespaces import TABLENS
    from odf.opendocument import load

    # odfpy builds the whole document, every sheet: its size is checked first
    size = _ods_size(data)
    expected = (f"at most {MAX_ROWS} rows in the spreadsheet, all sheets together, header "
                "included: a shake-flask study has tens of runs; keep other data in another file")
    if size is not None and size[0] > MAX_ROWS:
        return None, [Problem("the spreadsheet is too long to be read as one study's runs (an "
                              ".ods file is read whole, every sheet)", file=shown,
                              found=f"more than {MAX_ROWS} rows", expected=expected)]
    if size is not None and size[1] > _MAX_ODS_XML_BYTES:
        return None, [Problem("the spreadsheet is too large to be read as one study's runs (an "
                              ".ods file is read whole, every sheet)", file=shown,
                              found=f"over {_MAX_ODS_XML_BYTES} bytes of sheet XML",
                              expected=expected)]
    try:
        doc = load(io.BytesIO(data))
        tables = [t for t in doc.spreadsheet.childNodes
                  if getattr(t, "qname", None) == (TABLENS, "table")]
    except Exception as exc:   # odfpy raises zip, XML and attribute errors on broken files
        return None, [Problem(f"not a readable ODS spreadsheet ({type(exc).__name__}: {exc})",
                              file=shown, expected="an .ods spreadsheet saved by a spreadsheet")]
    names = [t.getAttrNS(TABLENS, "name") or f"Sheet{i + 1}" for i, t in enumerate(tables)]
    index, problem = _pick_sheet(names, sheet, shown)
    if problem:
        return None, [problem]
    records = []
    number = 0
    for row in _ods_rows(tables[index]):
        repeat = int(row.getAttrNS(TABLENS, "number-rows-repeated") or 1)
        cells: list[tuple[Cell, str]] = []
        for cell in row.childNodes:
            if getattr(cell, "qname", None) not in ((TABLENS, "table-cell"),
                                                    (TABLENS, "covered-table-cell")):
                continue
            value = _ods_cell(cell)
            times = int(cell.getAttrNS(TABLENS, "number-columns-repeated") or 1)
            times = min(times, max(0, _MAX_COLUMNS - len(cells)))
            cells.extend([value] * times)
        while cells and cells[-1][0] is None:
            cells.pop()
        if cells:
            if number + repeat > MAX_ROWS:
                first = max(number + 1, MAX_ROWS + 1)
                return None, [too_long(shown, f"data in row {first}", "row",
                                       sheet=names[index], row=first)]
            for k in range(repeat):
                records.append((number + k + 1, cells))
        number += repeat
    title = names[index]
    return _build(records, shown, kind="ods", convert=lambda c: c,
                  located=lambda n: Location(shown, row=n, sheet=title), sheet=title,
                  rules=rules)
