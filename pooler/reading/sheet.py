"""Stage 1: read a sheet of reported statistics into a validated :class:`Sheet`.

A sheet has one row per reported result (see ``pooler template`` and the README).
Column names are case-insensitive; unknown columns are kept and carried through.
Every record keeps the sheet's own row number (header = row 1), so every later
message and output can point back at the line the user typed.
"""
from __future__ import annotations

import csv
import datetime
import hashlib
import io
import math
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

from pooler.errors import InputError, InputErrors

#: Reported statistics the converters understand.
STATS = ("t", "F", "r", "d", "g", "means", "chi2", "counts", "odds_ratio", "p",
         "coef_t", "partial_r", "std_coef")
_STAT_ALIASES = {s.lower(): s for s in STATS} | {
    "chi": "chi2", "chisq": "chi2", "chi-square": "chi2", "x2": "chi2",
    "or": "odds_ratio", "odds ratio": "odds_ratio", "mean": "means", "count": "counts",
    "coefficient t": "coef_t", "t of coefficient": "coef_t", "partial r": "partial_r",
    "standardized coefficient": "std_coef", "standardised coefficient": "std_coef",
}

#: Columns read as numbers.
NUMERIC = ("value", "n1", "n2", "n", "df", "df1", "mean1", "sd1", "mean2", "sd2",
           "events1", "events2", "ci_low", "ci_high", "within_r", "tails", "year", "predictors")
#: Columns read as text.
#: The name of the worksheet with the column guide in a workbook from ``pooler template``.
GUIDE_SHEET = "column guide"

TEXT = ("study", "sample", "stat", "reported", "trust", "direction", "design", "published",
        "subgroup", "note", "exclude", "path")
KNOWN = TEXT + NUMERIC
REQUIRED = ("study", "stat")

#: What each column means, for the template's column guide and the README.
COLUMN_GUIDE: dict[str, str] = {
    "study": "label of the report (required)",
    "sample": "independent-sample id; rows sharing it are combined into one effect",
    "stat": "what was reported: " + ", ".join(STATS) + " (required unless 'reported' is filled;"
            " 'paired t' and 'd_z' mean t and d with design 'within')",
    "reported": "the result pasted as the paper prints it, e.g. 't(58) = 2.41, p = .019', "
                "'r = -.24, n = 97', 'OR = 2.30, 95% CI [1.10, 4.80]'; it fills stat, value, "
                "df, n and CI (typed columns may complete it; a disagreement is an error), and "
                "its numbers are checked against each other",
    "trust": "which number the effect uses when a reported result disagrees with itself: "
             "'statistic' (default) or 'p'",
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
    "design": "between (default), within, or correlation (a t, F(1, df) or p that tests a "
              "correlation: r = t / sqrt(t^2 + n - 2), Fisher z variance 1/(n - 3))",
    "within_r": "correlation between the repeated measures of a within-subject row",
    "tails": "1 or 2, for p (default 2)",
    "year": "publication year (cumulative analysis)",
    "published": "yes/no (sensitivity by publication status)",
    "subgroup": "label for a subgroup analysis",
    "note": "free text",
    "exclude": "free text; the row is listed with this reason but not pooled",
    "path": "for `pooler paths SHEET`: the pair of variables the row's result links, e.g. X-M1, "
            "M1-Y, X-Y, M1-M2 (X the predictor, M1.. the mediators, Y the outcome; simple "
            "mediation: X-M, M-Y, X-Y)",
    "predictors": "coef_t, partial_r, std_coef: number of predictors in the regression model the "
                  "coefficient comes from (1 = the pair alone)",
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
    parsed: Any = None  # pooler.reading.reported.Parsed of the 'reported' column, if filled
    from_reported: tuple = ()  # columns whose value came from the 'reported' string

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

def read_sheet(path, *, name: str | None = None) -> Sheet:
    """Read a CSV, TSV or XLSX sheet of reported statistics and validate it.

    Parameters
    ----------
    path : str, Path or pandas.DataFrame
        ``.csv`` (comma or semicolon separated, UTF-8), ``.tsv``/``.tab`` or ``.xlsx``; or a
        DataFrame with the same columns (one row per reported result), read exactly as the
        CSV it writes would be. Messages name its rows as a sheet's (header = row 1).
    name : str, optional
        What messages and reports call a DataFrame (default ``"DataFrame"``).

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
    >>> import pandas as pd
    >>> df = pd.DataFrame({"study": ["A", "B"], "stat": ["t", "r"], "value": [2.1, 0.3],
    ...                    "n1": [20, None], "n2": [22, None], "n": [None, 80]})
    >>> [r.row for r in read_sheet(df, name="my table").records]
    [2, 3]
    """
    if hasattr(path, "to_csv") and hasattr(path, "columns"):   # a pandas DataFrame
        data = path.to_csv(index=False, lineterminator="\n").encode("utf-8")
        label = name or "DataFrame"
        notes_df: list[str] = []
        header, body = _read_text(data, label, ".csv", notes_df)
        return _validate(label, hashlib.sha256(data).hexdigest(), header, body, notes_df)
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
    # the column guide `pooler template` writes beside the data is not worth a note
    extra = [w.title for w in wb.worksheets[1:] if w.title != GUIDE_SHEET]
    if extra:
        notes.append(f"workbook has {len(wb.worksheets)} sheets; read the first, '{ws.title}'")
    if ws.merged_cells.ranges:
        first = sorted(str(r) for r in ws.merged_cells.ranges)[0]
        raise InputError(f"merged cells ({first}) cannot be read as data; unmerge them and "
                         "repeat the value in each row", file=name)
    formulas = None
    rows = []
    for i, row in enumerate(ws.iter_rows(values_only=True), start=1):
        cells = []
        for j, v in enumerate(row, start=1):
            if v is None:
                if formulas is None:
                    formulas = openpyxl.load_workbook(io.BytesIO(data), data_only=False
                                                      ).worksheets[0]
                f = formulas.cell(i, j).value
                if isinstance(f, str) and f.startswith("="):
                    cells.append(_SpecialCell(f, "formula", (
                        f"the cell holds a formula ({f}) without a saved result, so it has no "
                        "value to read; open the file in your spreadsheet program and save it "
                        "again (that stores the result), or type the number")))
                else:
                    cells.append("")
            elif isinstance(v, (datetime.datetime, datetime.date, datetime.time)):
                cells.append(_SpecialCell(str(v), "date", (
                    f"the cell is an Excel date ({v}), not a number: the spreadsheet turned "
                    "what was typed into a date; format the column as Number (or Text) and "
                    "type the value again")))
            else:
                cells.append(_cell_text(v))
        rows.append((i, cells))
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


def parse_number(text: str, *, file: str, row: int, column: str, decimal_comma: bool,
                 whole: bool = False) -> float:
    """Parse one numeric cell, or raise an :class:`InputError` saying how to fix it.

    ``whole``: the column counts people or events, so a separator followed by three
    digits ("1,024", or "1.024" in a sheet that uses decimal commas) is read as a
    thousands separator and refused with that explanation.
    """
    s = text.strip().replace("\u2212", "-")  # typographic minus from PDFs
    thousands = re.fullmatch(r"\d{1,3}(?:([,.])\d{3})+", s)
    if thousands and (whole or (thousands.group(1) == "," and not decimal_comma)):
        plain = re.sub(r"[,.]", "", s)
        if whole:
            msg = (f"'{text}' looks like {plain} written with a thousands separator; type "
                   f"{plain} without one")
        else:
            msg = (f"'{text}' is ambiguous: type {plain} if the separator groups thousands, or "
                   f"{s.replace(',', '.')} if it is a decimal comma")
        raise InputError(msg, file=file, row=row, column=column)
    if decimal_comma and re.fullmatch(r"[+-]?\d*,\d+", s):
        s = s.replace(",", ".")
    if _NUM.match(s):
        return float(s)
    low = s.lower()
    hint = "give a plain number such as 2.31"
    if re.fullmatch(r"\(?n\.?\s?s\.?\)?|not significant|non-?significant", low):
        hint = ("'n.s.' (not significant) is not a statistic; a non-significant result without "
                "its statistic cannot be converted. Enter the exact statistic or the exact p "
                "(stat 'p'), or put the reason in 'exclude' (e.g. 'only n.s. reported')")
    elif re.fullmatch(r"[+-]?\d*,\d+", s):
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


#: Misspellings seen in practice, with the column meant (others are found by similarity).
_MISSPELLED = {"excluded": "exclude", "exclusion": "exclude", "within r": "within_r",
               "within-r": "within_r", "withinr": "within_r", "samples": "sample",
               "statistic": "stat", "stats": "stat", "directions": "direction",
               "as reported": "reported", "result string": "reported"}


def _did_you_mean(key: str) -> str | None:
    """The known column a header cell was probably meant to be, or None."""
    import difflib
    if key in _MISSPELLED:
        return _MISSPELLED[key]
    squashed = re.sub(r"[\s\-.]+", "_", key)
    if squashed in KNOWN:
        return squashed
    close = difflib.get_close_matches(key, KNOWN, n=1, cutoff=0.8)
    return close[0] if close else None


#: Columns that hold whole numbers (people, events, degrees of freedom of F's numerator).
WHOLE = ("n1", "n2", "n", "events1", "events2", "df1", "predictors")
#: Most problems a message lists (all are kept in ``InputErrors.errors``).
MAX_PROBLEMS = InputErrors.MAX_SHOWN


def _validate(name, digest, head, body, notes) -> Sheet:
    hrow, header, decimal_comma = head
    keys: list[str] = []
    seen: dict[str, str] = {}
    problems: list[InputError] = []
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
        if key not in KNOWN:
            meant = _did_you_mean(key)
            if meant is not None and meant not in [k.strip().lower() for k in header]:
                problems.append(InputError(
                    f"unknown column '{col}': did you mean '{meant}'? A misspelt column would "
                    "be carried along unread; rename it (or rename it to something clearly "
                    "different to keep it as an extra column)", file=name, row=hrow, column=col))
    for req in REQUIRED:
        if req not in seen and not (req == "stat" and "reported" in seen):
            near = [p for p in problems if f"did you mean '{req}'?" in p.message]
            problems = [p for p in problems if p not in near]
            hint = f" (did you mean '{near[0].column}'?)" if near else ""
            problems.insert(0, InputError(f"the required column '{req}' is missing{hint}; the "
                                          "header has: " + ", ".join(header),
                                          file=name, row=hrow))
    if problems:
        raise InputErrors(problems)
    if not body:
        raise InputError("the sheet has a header but no data rows", file=name)
    records = []
    for rownum, cells in body:
        try:
            records.append(_record(name, rownum, cells, header, keys, seen, decimal_comma,
                                   notes))
        except InputErrors as exc:
            problems.extend(exc.errors)
        except InputError as exc:
            problems.append(exc)
    if problems:
        if records:  # the rows that could be read may hold conversion problems too
            readable = Sheet(path=name, sha256=digest, columns=tuple(header),
                             records=tuple(records), notes=tuple(notes))
            problems.extend(_conversion_problems(readable))
            problems.sort(key=lambda e: e.row or 0)
        raise InputErrors(problems)
    return Sheet(path=name, sha256=digest, columns=tuple(header), records=tuple(records),
                 notes=tuple(notes))


def _conversion_problems(sheet: Sheet) -> list[InputError]:
    """What converting the readable rows would refuse, so that one run lists every
    problem of the sheet (conversion uses its default options here)."""
    from pooler.evidence.effects import convert
    try:
        convert(sheet)
    except InputErrors as exc:
        return list(exc.errors)
    except InputError as exc:
        return [exc]
    return []


def _record(name, rownum, cells, header, keys, seen, decimal_comma, notes) -> Record:
    """One data row checked and parsed; every cell problem of the row is reported.

    A row with a reason in ``exclude`` is only listed, never pooled: cells of it that
    cannot be read are left empty (and said in ``notes``) instead of stopping the run.
    """
    from pooler.reading.reported import parse_reported
    if len(cells) > len(header) and any(c.strip() for c in cells[len(header):]):
        raise InputError(f"this row has {len(cells)} cells but the header has {len(header)} "
                         "columns; check for a stray separator or a decimal comma",
                         file=name, row=rownum)
    cells = list(cells) + [""] * (len(header) - len(cells))
    values: dict[str, Any] = {}
    extra: dict[str, str] = {}
    errs: list[InputError] = []
    for key, col, cell in zip(keys, header, cells):
        if isinstance(cell, _SpecialCell) and (key in NUMERIC or (
                cell.kind == "formula" and key in KNOWN)):
            errs.append(InputError(cell.message, file=name, row=rownum, column=col))
            continue
        text = cell.strip()
        if key in NUMERIC:
            try:
                values[key] = (parse_number(text, file=name, row=rownum, column=col,
                                            decimal_comma=decimal_comma, whole=key in WHOLE)
                               if text else None)
            except InputError as exc:
                errs.append(exc)
        elif key in TEXT:
            values[key] = text or None
        else:
            extra[col] = cell
    if errs and values.get("exclude"):
        for e in errs:
            values[next(k for k, c in zip(keys, header) if c == e.column)] = None
        notes.append(f"row {rownum} is excluded; its unreadable cell(s) "
                     + ", ".join(f"'{e.column}'" for e in errs) + " left empty")
        errs = []
    if errs:
        raise InputErrors(errs)
    for key in KNOWN:
        values.setdefault(key, None)

    def err(key, msg):
        return InputError(msg, file=name, row=rownum, column=seen.get(key, key))

    if not values["study"]:
        raise err("study", "the study label is empty; every row needs one")
    stat = values["stat"]
    if stat:
        low = re.sub(r"\s+", " ", stat.strip().lower())
        canon = _STAT_ALIASES.get(low)
        if canon is None and low in _WITHIN_ALIASES:
            canon = _WITHIN_ALIASES[low]
            design = (values["design"] or "within").strip().lower()
            if design not in _WITHIN_WORDS:
                raise err("stat", f"'{stat}' is a within-subject statistic but design is "
                                  f"'{values['design']}'; use stat '{canon}' with the design "
                                  "that matches the study")
            values["design"] = values["design"] or "within"
        if canon is None and not values["exclude"]:
            raise err("stat", f"unknown statistic '{stat}'; use one of: " + ", ".join(STATS))
        values["stat"] = canon or stat
    parsed = None
    filled: tuple = ()
    if values["reported"]:
        try:
            parsed = parse_reported(values["reported"], file=name, row=rownum,
                                    column=seen["reported"])
        except InputError:
            if not values["exclude"]:
                raise
            notes.append(f"row {rownum} is excluded; its 'reported' string is kept as text "
                         "but not read")
        if parsed is not None:
            filled = _merge(parsed, values, err, seen)
    if not values["stat"]:
        if values["exclude"]:
            values["stat"] = None
        else:
            col = "stat" if "stat" in seen else "reported"
            raise err(col, f"'{col}' is empty; say what was reported: " + ", ".join(STATS)
                      + (" (or paste the result in 'reported')" if col == "stat" else ""))
    if values["trust"] is not None:
        t = values["trust"].strip().lower()
        from pooler.reading.reported import TRUST_VALUES
        if t not in TRUST_VALUES:
            raise err("trust", f"trust '{values['trust']}' is not understood; use 'statistic' "
                               "(the default) or 'p'")
        values["trust"] = t
    blanked: list[str] = []

    def impossible(key, msg):
        """An impossible number: an error, or on an excluded row left empty (and said),
        as an unreadable cell of an excluded row is."""
        if not values["exclude"]:
            raise err(key, msg)
        values[key] = None
        blanked.append(seen.get(key, key))

    for key in ("value", "n1", "n2", "n", "df", "df1", "sd1", "sd2", "tails", "within_r",
                "events1", "events2", "ci_low", "ci_high", "mean1", "mean2", "year",
                "predictors"):
        v = values[key]
        if v is not None and not math.isfinite(v):
            impossible(key, f"'{v}' is not a finite number")
    # an SD of 0 is refused by the conversion of means too (the standardiser must be > 0),
    # so a negative SD is told the same rule rather than "zero or more"
    pos = ("n1", "n2", "n", "df", "df1", "predictors", "sd1", "sd2")
    for key in ("n1", "n2", "n", "df", "df1", "sd1", "sd2", "events1", "events2", "predictors"):
        v = values[key]
        if v is not None and (v < 0 or (v == 0 and key in pos)):
            impossible(key, f"{key} = {v:g} is impossible; it must be "
                            f"{'positive' if key in pos else 'zero or more'}")
    for ev, nk in (("events1", "n1"), ("events2", "n2")):
        e, n = values[ev], values[nk]
        if e is not None and 0 < e < 1 and (n is None or n > 1):
            impossible(ev, f"{ev} = {e:g} looks like a proportion, but this column takes a count "
                          f"of people" + (f" (with {nk} = {n:g}, {e:g} of the group is "
                                          f"{e * n:g} people)" if n is not None else "")
                          + "; type the number of events")
    for key in WHOLE:
        v = values[key]
        if v is not None and not float(v).is_integer():
            hint = ""
            if key in ("n1", "n2") and abs(v * 2 - round(v * 2)) < 1e-9:
                hint = ("; if only the total N was reported, put it in 'n' and leave n1 and n2 "
                        "empty (it is split equally, halves included)")
            what = {"df1": "degrees of freedom", "predictors": "predictors"}.get(key, "people")
            impossible(key, f"{key} = {v:g} is not a whole number; it counts {what}" + hint)
    if blanked:
        notes.append(f"row {rownum} is excluded; its impossible value(s) in "
                     + ", ".join(f"'{c}'" for c in blanked) + " left empty")
    return Record(row=rownum, values=values, extra=extra, parsed=parsed,
                  from_reported=filled)


_WITHIN_WORDS = ("within", "w", "paired", "repeated", "within-subject", "within-subjects")
#: Within-subject spellings of a statistic: the statistic, with design 'within'.
_WITHIN_ALIASES = {"d_z": "d", "dz": "d", "d z": "d", "paired t": "t", "paired-t": "t",
                   "paired_t": "t", "t paired": "t", "dependent t": "t"}


def _merge(parsed, values: dict, err, seen) -> tuple:
    """Complete the row's columns from a parsed result string; a column the user filled
    that disagrees with the string is an error (never silently overridden). Returns the
    columns filled from the string."""
    col = seen.get("reported", "reported")
    filled = []
    for key, v in parsed.values.items():
        if key.startswith("_"):
            continue
        have = values.get(key)
        if have is None:
            values[key] = v
            filled.append(key)
            continue
        if key == "stat":
            if have != v:
                raise err("stat", f"'stat' says {have} but the '{col}' string is a {v}; "
                                  "empty one of them or make them agree")
            continue
        if abs(have - v) > 1e-9 * max(1.0, abs(v)):
            raise err(key, f"'{key}' holds {have:g} but the '{col}' string says {key} = {v:g}; "
                           "fix one of them or leave the column empty")
    return tuple(filled)


class _SpecialCell(str):
    """A spreadsheet cell that holds no usable value, with the reason why."""

    def __new__(cls, text: str, kind: str, message: str):
        obj = super().__new__(cls, text)
        obj.kind = kind
        obj.message = message
        return obj


def column_label(sheet: Sheet, key: str) -> str:
    """The column name as the sheet spells it (for messages)."""
    for col in sheet.columns:
        if col.strip().lower() == key:
            return col
    return key
