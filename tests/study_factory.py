"""Builders of small study folders and workbooks in a temporary folder, for reader tests."""

from __future__ import annotations

from pathlib import Path

STUDY_YAML = """\
title: Test study
analyte:
  name: TX-1
  model: base
system:
  aqueous: 0.1 M phosphate buffer
  organic: n-heptane
  temperature_C: 25
runs: {runs}
targets:
  recovery_pct: 95
procedures:
  - id: P1
    label: Three portions at pH 8
    pH: 8.0
    aqueous_mL: 10
    organic_mL: [10, 10, 10]
"""

#: Three valid runs, both phases measured, mass balances 99-101 %.
RUNS_CSV = """\
run,pH,aqueous_mL,organic_mL,spiked,found_aqueous,found_organic
R1,7.0,10,10,100,40,59
R2,8.0,10,10,100,20,79
R3,9.0,10,20,100,5,96
"""

HEADER = ["run", "pH", "aqueous_mL", "organic_mL", "spiked", "found_aqueous", "found_organic"]
ROWS = [["R1", 7.0, 10, 10, 100, 40, 59],
        ["R2", 8.0, 10, 10, 100, 20, 79],
        ["R3", 9.0, 10, 20, 100, 5, 96]]


def write_study(root: Path, name: str = "ST-1", *, yaml_text: str | None = None,
                runs: str | bytes | None = RUNS_CSV, runs_name: str = "runs.csv",
                yaml_bytes: bytes | None = None) -> Path:
    """A study folder ``root/name`` with study.yaml and (unless None) the runs file."""
    folder = Path(root) / name
    folder.mkdir(parents=True, exist_ok=True)
    if yaml_bytes is not None:
        (folder / "study.yaml").write_bytes(yaml_bytes)
    else:
        text = yaml_text if yaml_text is not None else STUDY_YAML.format(runs=runs_name)
        (folder / "study.yaml").write_text(text, encoding="utf-8")
    if runs is not None:
        data = runs.encode("utf-8") if isinstance(runs, str) else runs
        (folder / runs_name).parent.mkdir(parents=True, exist_ok=True)
        (folder / runs_name).write_bytes(data)
    return folder


def replace_line(text: str, old: str, new: str) -> str:
    """``text`` with the one line equal to ``old`` (stripped) replaced by ``new``."""
    lines = text.splitlines()
    hits = [i for i, line in enumerate(lines) if line.strip() == old]
    assert len(hits) == 1, f"{old!r} found {len(hits)} times"
    lines[hits[0]] = new
    return "\n".join(lines) + "\n"


def write_xlsx(path: Path, rows_by_number: dict[int, list], sheet: str = "Runs",
               before: tuple[str, ...] = (), percent: set[tuple[int, int]] = frozenset()) -> Path:
    """An .xlsx whose sheet ``sheet`` holds each list at its 1-based row number.

    ``before`` names sheets placed ahead of it; ``percent`` marks (row, column) cells with a
    percentage number format.
    """
    import openpyxl

    wb = openpyxl.Workbook()
    first = wb.active
    if before:
        first.title = before[0]
        for name in before[1:]:
            wb.create_sheet(name)
        ws = wb.create_sheet(sheet)
    else:
        ws = first
        ws.title = sheet
    for number, values in rows_by_number.items():
        for col, value in enumerate(values, start=1):
            cell = ws.cell(row=number, column=col, value=value)
            if (number, col) in percent:
                cell.number_format = "0%"
    wb.save(path)
    return path


def write_ods(path: Path, rows: list, sheet: str = "Runs") -> Path:
    """An .ods from ``rows``: each item a list of cells, or an int n for n repeated blank rows."""
    from odf.opendocument import OpenDocumentSpreadsheet
    from odf.table import Table, TableCell, TableRow
    from odf.text import P

    doc = OpenDocumentSpreadsheet()
    table = Table(name=sheet)
    for item in rows:
        if isinstance(item, int):
            blank = TableRow(numberrowsrepeated=str(item))
            blank.addElement(TableCell())
            table.addElement(blank)
            continue
        tr = TableRow()
        for value in item:
            if value is None:
                tr.addElement(TableCell())
            elif isinstance(value, (int, float)):
                cell = TableCell(valuetype="float", value=str(value))
                cell.addElement(P(text=str(value)))
                tr.addElement(cell)
            else:
                cell = TableCell(valuetype="string")
                cell.addElement(P(text=str(value)))
                tr.addElement(cell)
        table.addElement(tr)
    doc.spreadsheet.addElement(table)
    doc.save(str(path))
    return path


def snapshot(folder: Path) -> dict:
    """Every path below ``folder`` with its size and modification time, for no-write checks."""
    return {p.relative_to(folder).as_posix(): (p.stat().st_size, p.stat().st_mtime_ns)
            for p in sorted(Path(folder).rglob("*"))} | {
        ".": (None, Path(folder).stat().st_mtime_ns)}


def reading_problems(problems) -> list:
    """The problems of reading a table: without the warning that the factory's procedure
    (pH 8, one to one) lies outside the runs of a small test table, which
    tests/test_extrapolation.py checks on its own."""
    from extractval.extrapolation import MARK

    return [p for p in problems if not (p.key and p.key.startswith("procedures[")
                                        and MARK in p.message)]

