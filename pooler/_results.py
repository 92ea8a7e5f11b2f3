"""Shared pieces of the result objects: intervals, "not estimable", JSON helpers."""
from __future__ import annotations

import math
from dataclasses import dataclass, fields, is_dataclass
from typing import Any


@dataclass(frozen=True)
class Interval:
    """A confidence or prediction interval ``(low, high)`` at ``level`` (0-1)."""

    low: float
    high: float
    level: float = 0.95

    def to_dict(self) -> dict:
        return {"low": _clean(self.low), "high": _clean(self.high), "level": self.level}

    def __repr__(self) -> str:
        return f"Interval({self.low:.4g}, {self.high:.4g}, level={self.level:g})"


@dataclass(frozen=True)
class NotEstimable:
    """Stands in for a number that cannot be computed, with the reason in words."""

    reason: str

    def to_dict(self) -> dict:
        return {"status": "not estimable", "reason": self.reason}

    def __str__(self) -> str:
        return f"not estimable: {self.reason}"

    def __bool__(self) -> bool:  # so `if result:` reads naturally
        return False


def estimable(x: Any) -> bool:
    """True when ``x`` is a usable value rather than :class:`NotEstimable` or None."""
    return x is not None and not isinstance(x, NotEstimable)


def _clean(x: Any) -> Any:
    """Make a value JSON-ready: numpy scalars to Python, non-finite floats refused."""
    if isinstance(x, NotEstimable):
        return x.to_dict()
    if hasattr(x, "to_dict") and not isinstance(x, type):
        return x.to_dict()
    if is_dataclass(x) and not isinstance(x, type):
        return {f.name: _clean(getattr(x, f.name)) for f in fields(x)}
    if isinstance(x, dict):
        return {str(k): _clean(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_clean(v) for v in x]
    if hasattr(x, "item") and callable(x.item):  # numpy scalar
        x = x.item()
    if isinstance(x, float):
        if not math.isfinite(x):
            raise ValueError("a non-finite number reached the JSON output; "
                             "it should have been reported as not estimable")
        return x
    return x


to_jsonable = _clean


def p_text(p: float) -> str:
    """A p-value as the report prints it everywhere: "p = .003", "p < .001", "p > .999"
    (APA style, common practice: no leading zero, three decimals).

    Examples
    --------
    >>> p_text(0.0032), p_text(0.00001), p_text(0.2209), p_text(0.99999)
    ('p = .003', 'p < .001', 'p = .221', 'p > .999')
    """
    if p < 0.001:
        return "p < .001"
    if p > 0.999:
        return "p > .999"
    return "p = " + f"{p:.3f}".lstrip("0")


def plural(n: int, one: str, many: str | None = None) -> str:
    """``n`` with the right form of a noun: "1 study", "5 studies".

    Examples
    --------
    >>> plural(1, "study", "studies"), plural(5, "study", "studies"), plural(2, "row")
    ('1 study', '5 studies', '2 rows')
    """
    return f"{n:,} {one if n == 1 else (many or one + 's')}"


def fmt(x: Any, digits: int = 3) -> str:
    """Format a number for a terminal table; not-estimable values as their reason."""
    if x is None:
        return ""
    if isinstance(x, NotEstimable):
        return str(x)
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, int):
        return f"{x:,}"
    if isinstance(x, float):
        if not math.isfinite(x):
            return "not estimable"
        return f"{x:.{digits}f}"
    return str(x)


def text_table(headers: list[str], rows: list[list[Any]], digits: int = 3,
               numeric: list[bool] | None = None) -> str:
    """A plain aligned text table (no pandas, so the quick commands stay quick).

    Columns whose values are all numbers (or empty) are right-aligned, or the columns
    ``numeric`` says when the cells are already formatted text.
    """
    if numeric is None:
        numeric = [all(isinstance(r[i], (int, float)) and not isinstance(r[i], bool)
                       or r[i] is None for r in rows) for i in range(len(headers))]
    cells = [[fmt(c, digits) for c in r] for r in rows]
    widths = [max([len(h)] + [len(r[i]) for r in cells]) for i, h in enumerate(headers)]

    def line(vals):
        return "  ".join(v.rjust(w) if num else v.ljust(w)
                         for v, w, num in zip(vals, widths, numeric)).rstrip()
    sep = "  ".join("-" * w for w in widths)
    return "\n".join([line(headers), sep] + [line(r) for r in cells])


def csv_safe(value):
    """Neutralise spreadsheet formula injection: text starting with = + - @ (or a tab or
    carriage return) gets a leading apostrophe. Numbers are left alone."""
    if isinstance(value, str) and value[:1] in ("=", "+", "-", "@", "\t", "\r"):
        return "'" + value
    return value


class ShowsAsTable:
    """Mixin: a stage result shows in a notebook (Jupyter calls ``_repr_html_``) as the same
    section the terminal and the report show (:data:`pooler.output.report.NOTEBOOK_SECTIONS`, the
    one content model), or as its ``to_frame()`` table when it has no section."""

    def _repr_html_(self) -> str:
        from pooler.output.blocks import html_fragment
        from pooler.output.report import NOTEBOOK_SECTIONS
        section = NOTEBOOK_SECTIONS.get(type(self).__name__)
        if section is None:
            return self.to_frame().to_html(index=False, na_rep="")
        return html_fragment(section(self))
