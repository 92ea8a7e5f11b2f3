"""Stage 1: read a sheet of reported statistics into a validated :class:`Sheet`.

A sheet has one row per reported result (see ``pooler template`` and the README).
Column names are case-insensitive; unknown columns are kept and carried through.
Every record keeps the sheet's own row number (header = row 1), so every later
message and output can point back at the line the user typed.
"""
from __future__ import annotations

import csv
import hashlib
import io
import math
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

from .errors import InputError

#: Reported statistics the converters understand.
STATS = ("t", "F", "r", "d", "g", "means", "chi2", "counts", "odds_ratio", "p")
_STAT_ALIASES = {s.lower(): s for s in STATS} | {
    "chi": "chi2", "chisq": "chi2", "chi-square": "chi2", "x2": "chi2",
    "or": "odds_ratio", "odds ratio": "odds_ratio", "mean": "means", "count": "counts",
}

#: Columns read as numbers.
NUMERIC = ("value", "n1", "n2", "n", "df", "df1", "mean1", "sd1", "mean2", "sd2",
           "events1", "events2", "ci_low", "ci_high", "within_r", "tails", "year")
#: Columns read as text.
TEXT = ("study", "sample", "stat", "direction", "design", "published", "subgroup",
        "note", "exclude")
KNOWN = TEXT + NUMERIC
REQUIRED = ("study", "stat")

#: What each column means, for the template's column guide and the README.
COLUMN_GUIDE: dict[str, str] = {
    "study": "label of the report (required)",
    "sample": "independent-sample id; rows sharing it are combined into one effect",
    "stat": "what was reported: " + ", ".join(STATS) + " (required)",
    "value": "the reported number for t, F, r, d, g, chi2, odds_ratio or p",
    "n1": "size of group 1 (the group expected to score higher)",
    "n2": "size of group 2",
    "n": "total N (correlations, within-subject results, chi2; or when group sizes are unknown)",
    "df": "t's df, or F's error df, when n is missing",
    "df1": "F's numerator df (must be 1 to convert to d)",
    "mean1": "mean of group 1 (or time 1)", "sd1": "SD of group 1",
    "mean2": "mean of group 2 (or time 2)", "sd2": "SD of group 2",
    "events1": "events among n1 (counts)", "events2": "events among n2 (counts)",
    "ci_low": "lower 95% limit of an odds ratio", "ci_high": "upper 95% limit of an odds ratio",
    "direction": "+ if the result favours the hypothesis, - if not (required for F, chi2, p)",
    "design": "between (default) or within",
    "within_r": "correlation between the repeated measures of a within-subject row",
    "tails": "1 or 2, for p (default 2)",
    "year": "publication year (cumulative analysis)",
    "published": "yes/no (sensitivity by publication status)",
    "subgroup": "label for a subgroup analysis",
    "note": "free text",
    "exclude": "free text; the row is listed with this reason but not pooled",
}


@dataclass(frozen=True)
class Record:
    """One data row of the sheet.

    Attributes
    ----------
    row : int
        The sheet's own row number (header = 1).
    values : Mapping[str, Any]
        Known columns, parsed: floats for numeric columns, stripped text (or None) otherwise.
    extra : Mapping[str, str]
        Unknown columns, as text, carried through to the outputs.
    """

    row: int
    values: Mapping[str, Any]
    extra: Mapping[str, str] = field(default_factory=dict)

    def get(self, key: str, default: Any = None) -> Any:
        v = self.values.get(key)
        return default if v is None else v

    @property
    def study(self) -> str:
        return self.values["study"]

    @property
    def stat(self) -> str:
        return self.values["stat"]


@dataclass(frozen=True)
class Sheet:
    """A validated sheet.

    Attributes
    ----------
    path : str
        The file it was read from.
    sha256 : str
        SHA-256 of the file's bytes, for the reproducibility record.
    columns : tuple of str
        The header as written (original spelling), in order.
    records : tuple of Record
        The data rows, in sheet order; blank rows are not records.
    notes : tuple of str
        Things noticed while reading (blank rows skipped, delimiter detected...).
    """

    path: str
    sha256: str
    columns: tuple[str, ...]
    records: tuple[Record, ...]
    notes: tuple[str, ...] = ()

    @property
    def name(self) -> str:
        return Path(self.path).name

    @property
    def extra_columns(self) -> tuple[str, ...]:
        return tuple(c for c in self.columns if c.strip().lower() not in KNOWN)

    def __len__(self) -> int:
        return len(self.records)

    def to_frame(self):
        import pandas as pd
        rows = [{"row": r.row, **dict(r.values), **dict(r.extra)} for r in self.records]
        return pd.DataFrame(rows)

    def to_dict(self) -> dict:
        return {"file": self.path, "sha256": self.sha256, "columns": list(self.columns),
                "rows": [{"row": r.row, **dict(r.values), **dict(r.extra)} for r in self.records],
                "notes": list(self.notes)}

    def __repr__(self) -> str:
        return f"Sheet({self.name!r}, {len(self.records)} rows, sha256={self.sha256[:12]}…)"


# --------------------------------------------------------------------------- reading

def read_sheet(path: str | Path) -> Sheet:
    """Read a CSV, TSV or XLSX sheet of reported statistics and validate it.

    Parameters
    ----------
    path : str or Path
        ``.csv`` (comma or semicolon separated, UTF-8), ``.tsv``/``.tab`` or ``.xlsx``.

    Returns
    -------
    Sheet

    Raises
    ------
    InputError
        With file, row and column, for anything that cannot be read as a sheet.

    Examples
    --------
    >>> from pooler import read_sheet, demo_sheet_path
    >>> sheet = read_sheet(demo_sheet_path())
    >>> sheet.records[0].row
    2
    """
    p = Path(path)
    name = str(path)
    if not p.exists():
        raise InputError("file not found", file=name)
    if p.is_dir():
        raise InputError("is a folder, not a sheet file", file=name)
    try:
        data = p.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot be read ({exc.strerror})", file=name) from None
    digest = hashlib.sha256(data).hexdigest()
    suffix = p.suffix.lower()
    notes: list[str] = []
    if suffix in (".xlsx", ".xlsm"):
        header, body = _read_xlsx(data, name, notes)
    elif suffix in (".xls", ".ods", ".numbers"):
        raise InputError(f"'{suffix}' files are not read; save the sheet as .xlsx or .csv", file=name)
    else:
        header, body = _read_text(data, name, suffix, notes)
    return _validate(name, digest, header, body, notes)


def _read_text(data: bytes, name: str, suffix: str, notes: list[str]):
    if not data.strip():
        raise InputError("the file is empty; it needs a header row and at least one data row",
                         file=name)
    if data[:2] in (b"\xff\xfe", b"\xfe\xff"):
        raise InputError("the file is UTF-16 text; save it as 'CSV UTF-8' in your spreadsheet "
                         "program", file=name)
    if b"\x00" in data[:4096]:
        raise InputError("this is not a text sheet (binary content); "
                         "save it as .csv or .xlsx", file=name)
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[:exc.start].count(b"\n") + 1
        raise InputError(
            f"the file is not UTF-8 (byte 0x{data[exc.start]:02x} on line {line}); "
            "save it as 'CSV UTF-8' in your spreadsheet program", file=name, row=line) from None
    if data.startswith(b"\xef\xbb\xbf"):
        notes.append("UTF-8 byte-order mark ignored")
    first = next((ln for ln in text.splitlines() if ln.strip()), "")
    if suffix in (".tsv", ".tab"):
        delim = "\t"
    else:
        counts = {d: first.count(d) for d in (",", ";", "\t")}
        delim = max(counts, key=counts.get)
        if counts[delim] == 0:
            delim = ","
        if delim != ",":
            notes.append(f"columns separated by {'semicolons' if delim == ';' else 'tabs'}")
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delim, strict=True)
    rows: list[tuple[int, list[str]]] = []
    try:
        start = 1
        for cells in reader:
            rows.append((start, cells))
            start = reader.line_num + 1
    except csv.Error as exc:
        raise InputError(f"malformed CSV ({exc}); check for an unclosed quote",
                         file=name, row=reader.line_num) from None
    return _split_header(rows, name, notes, decimal_comma=(delim == ";"))


def _read_xlsx(data: bytes, name: str, notes: list[str]):
    try:
        import openpyxl
    except ImportError:  # pragma: no cover - openpyxl is a dependency
        raise InputError("reading .xlsx needs openpyxl: pip install openpyxl", file=name) from None
    try:
        wb = openpyxl.load_workbook(io.BytesIO(data), read_only=False, data_only=True)
    except Exception as exc:  # openpyxl raises many types for a damaged file
        raise InputError(f"not a readable .xlsx workbook ({type(exc).__name__}); "
                         "re-save it from your spreadsheet program", file=name) from None
    ws = wb.worksheets[0]
    if len(wb.worksheets) > 1 and ws.max_row <= 1 and ws.max_column <= 1 and ws.cell(1, 1).value is None:
        others = [w.title for w in wb.worksheets[1:] if w.max_row > 1 or w.cell(1, 1).value]
        if others:
            raise InputError(f"the first worksheet ('{ws.title}') is empty; pooler reads only the "
                             f"first worksheet, so move the data from '{others[0]}' to the front",
                             file=name)
    if len(wb.worksheets) > 1:
        notes.append(f"workbook has {len(wb.worksheets)} sheets; read the first, '{ws.title}'")
    if ws.merged_cells.ranges:
        first = sorted(str(r) for r in ws.merged_cells.ranges)[0]
        raise InputError(f"merged cells ({first}) cannot be read as data; unmerge them and "
                         "repeat the value in each row", file=name)
    rows = []
    for i, row in enumerate(ws.iter_rows(values_only=True), start=1):
        rows.append((i, ["" if v is None else _cell_text(v) for v in row]))
    return _split_header(rows, name, notes, decimal_comma=False)


def _cell_text(v: Any) -> str:
    if isinstance(v, float) and v.is_integer() and abs(v) < 1e15:
        return repr(v)
    return str(v)


def _split_header(rows, name, notes, decimal_comma):
    nonblank = [(i, cells) for i, cells in rows if any(c.strip() for c in cells)]
    if not nonblank:
        raise InputError("the sheet is empty; it needs a header row and at least one data row",
                         file=name)
    (hrow, header), body = nonblank[0], nonblank[1:]
    blanks = len(rows) - len(nonblank) - (hrow - 1 if hrow > 1 else 0)
    if hrow > 1:
        notes.append(f"header found on row {hrow}")
    if blanks > 0:
        notes.append(f"{blanks} blank row(s) skipped")
    while header and not header[-1].strip():
        header = header[:-1]
    return (hrow, header, decimal_comma), body


_NUM = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")


def parse_number(text: str, *, file: str, row: int, column: str, decimal_comma: bool) -> float:
    """Parse one numeric cell, or raise an :class:`InputError` saying how to fix it."""
    s = text.strip().replace("\u2212", "-")  # typographic minus from PDFs
    if decimal_comma and re.fullmatch(r"[+-]?\d*,\d+", s):
        s = s.replace(",", ".")
    if _NUM.match(s):
        return float(s)
    low = s.lower()
    hint = "give a plain number such as 2.31"
    if re.fullmatch(r"[+-]?\d*,\d+", s):
        hint = "use a dot as decimal separator (2.31, not 2,31)"
    elif low.startswith(("<", ">", "≤", "≥", "p<", "p>", "p =", "p=")) or "<" in low or ">" in low:
        hint = ("an inequality is not an exact value; give the exact number, or mark the row "
                "in 'exclude' with the reason")
    elif re.search(r"\d[*†‡]+$", s):
        hint = "remove the significance stars"
    elif re.match(r"^[a-z]+\s*\(", low):
        hint = "give only the number; put degrees of freedom in 'df' (and 'df1' for F)"
    elif re.match(r"^[+-]?\d", s):
        hint = "remove units or other text after the number"
    elif low in ("nan", "inf", "-inf", "na", "n/a"):
        hint = "leave the cell empty if the value is unknown"
    raise InputError(f"'{text}' is not a number; {hint}", file=file, row=row, column=column)


def _validate(name, digest, head, body, notes) -> Sheet:
    hrow, header, decimal_comma = head
    keys: list[str] = []
    seen: dict[str, str] = {}
    for col in header:
        key = col.strip().lower()
        if not key:
            raise InputError("a column has no name in the header; name it or delete it",
                             file=name, row=hrow)
        if key in seen:
            raise InputError(f"the column name appears twice ('{seen[key]}' and '{col}'); "
                             "rename or delete one", file=name, row=hrow, column=col)
        seen[key] = col
        keys.append(key)
    for req in REQUIRED:
        if req not in seen:
            raise InputError(f"the required column '{req}' is missing; the header has: "
                             + ", ".join(header), file=name, row=hrow)
    if not body:
        raise InputError("the sheet has a header but no data rows", file=name)
    records = []
    for rownum, cells in body:
        if len(cells) > len(header) and any(c.strip() for c in cells[len(header):]):
            raise InputError(f"this row has {len(cells)} cells but the header has {len(header)} "
                             "columns; check for a stray separator or a decimal comma",
                             file=name, row=rownum)
        cells = list(cells) + [""] * (len(header) - len(cells))
        values: dict[str, Any] = {}
        extra: dict[str, str] = {}
        for key, col, cell in zip(keys, header, cells):
            text = cell.strip()
            if key in NUMERIC:
                values[key] = (parse_number(text, file=name, row=rownum, column=col,
                                            decimal_comma=decimal_comma) if text else None)
            elif key in TEXT:
                values[key] = text or None
            else:
                extra[col] = cell
        for key in KNOWN:
            values.setdefault(key, None)
        if not values["study"]:
            raise InputError("the study label is empty; every row needs one",
                             file=name, row=rownum, column=seen["study"])
        stat = values["stat"]
        if not stat:
            if values["exclude"]:
                values["stat"] = None
            else:
                raise InputError("'stat' is empty; say what was reported: " + ", ".join(STATS),
                                 file=name, row=rownum, column=seen["stat"])
        else:
            canon = _STAT_ALIASES.get(stat.strip().lower())
            if canon is None and not values["exclude"]:
                raise InputError(f"unknown statistic '{stat}'; use one of: " + ", ".join(STATS),
                                 file=name, row=rownum, column=seen["stat"])
            values["stat"] = canon or stat
        for key in ("value", "n1", "n2", "n", "df", "df1", "sd1", "sd2", "tails", "within_r",
                    "events1", "events2", "ci_low", "ci_high", "mean1", "mean2", "year"):
            v = values[key]
            if v is not None and not math.isfinite(v):
                raise InputError(f"'{v}' is not a finite number", file=name, row=rownum,
                                 column=seen.get(key, key))
        for key in ("n1", "n2", "n", "df", "df1", "sd1", "sd2", "events1", "events2"):
            v = values[key]
            if v is not None and (v < 0 or (v == 0 and key in ("n1", "n2", "n", "df", "df1"))):
                raise InputError(f"{key} = {v:g} is impossible; it must be "
                                 f"{'positive' if key in ('n1', 'n2', 'n', 'df', 'df1') else 'zero or more'}",
                                 file=name, row=rownum, column=seen.get(key, key))
        records.append(Record(row=rownum, values=values, extra=extra))
    return Sheet(path=name, sha256=digest, columns=tuple(header), records=tuple(records),
                 notes=tuple(notes))


def column_label(sheet: Sheet, key: str) -> str:
    """The column name as the sheet spells it (for messages)."""
    for col in sheet.columns:
        if col.strip().lower() == key:
            return col
    return key
