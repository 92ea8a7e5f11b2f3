"""The content model of every output, and its three renderers.

Every section of what pooler shows (the decision, the conversions, the pooled estimate, the
bias suite, the scenarios, the planning table ...) is built once, from the result objects, as
a list of :class:`Block` values: headings, paragraphs, notes, lists, tables whose cells are
already formatted, figures. :func:`to_text` (the terminal), :func:`to_markdown`
(``report.md``) and :func:`to_html` (``report.html``; :func:`html_fragment` for a notebook)
only lay those blocks out, so a number or a sentence reads the same in every output. A block
marked ``detail`` is left out of the short terminal summary of a whole run
(:func:`brief`); nothing else differs between the outputs.

Text in a block is Markdown-safe: user text goes through :func:`md_escape`, our own words
may use ``**bold**`` and ```code``` and nothing else. No numbers are formatted here.
"""
from __future__ import annotations

import base64
import html
import re
from dataclasses import dataclass

#: The kinds of block, and what each renderer makes of them. "begin"/"end" open and close
#: a named section (``text`` is its id; only HTML shows it, as ``<section id=...>``).
KINDS = ("h1", "h2", "h3", "p", "note", "list", "table", "key", "figure", "code", "begin",
         "end")


@dataclass(frozen=True)
class Block:
    """One piece of content: ``kind`` (one of :data:`KINDS`), its ``text``, a table's
    ``headers`` and ``rows`` (formatted strings), a list's ``items``, a figure's file stem
    ``src``; ``detail`` blocks are left out of the terminal summary of a run."""

    kind: str
    text: str = ""
    headers: tuple = ()
    rows: tuple = ()
    items: tuple = ()
    src: str = ""
    detail: bool = False


def brief(blocks) -> list[Block]:
    """The blocks without the ``detail`` ones: the terminal summary's selection."""
    return [b for b in blocks if not b.detail]


def md_escape(text: str) -> str:
    """Escape user text for Markdown (and for the HTML many Markdown renderers allow)."""
    text = str(text).replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
    return re.sub(r"([\\`*_\[\]|#!])", r"\\\1", text)


def safe_md(text: str) -> str:
    """Our own text for Markdown: only the characters Markdown would misread (a table's
    ``|``, emphasis ``*``)."""
    return str(text).replace("|", "\\|").replace("*", "\\*")


# ------------------------------------------------------------------ terminal

_NUMBER = re.compile(r"^[-+]?(\d{1,3}(,\d{3})+|\d+)?(\.\d+)?%?$")
_INTERVAL = re.compile(r"^\[[-+\d.,% ]+\]$")
_BOLD = re.compile(r"(?<!\\)\*\*(.+?)(?<!\\)\*\*")
_CODE = re.compile(r"`([^`]*)`")
_ESCAPED = re.compile(r"\\([\\`*_\[\]|#!])")
_MARKS = re.compile(r"[*`\\&]")      # text without these is already plain


def _column_kinds(rows) -> list[str]:
    """Per column: "num" when every cell is a number (or empty), "ci" when every cell is an
    interval "[low, high]" (or empty), else "". Renderers align and keep these whole."""
    if not rows:
        return []
    kinds = []
    for col in zip(*rows):
        cells = [_plain(c) for c in col]
        kinds.append("num" if all(_NUMBER.match(c) for c in cells) else
                     "ci" if all(not c or _INTERVAL.match(c) for c in cells) else "")
    return kinds


def _plain(t) -> str:
    """Markdown-safe block text as plain text: bold and code marks and escapes removed."""
    t = str(t)
    if not _MARKS.search(t):
        return t
    t = _ESCAPED.sub(r"\1", _CODE.sub(r"\1", _BOLD.sub(r"\1", t)))
    return html.unescape(t)


def _text_table(headers, rows) -> list[str]:
    """An aligned table; a column whose cells are all numbers (or empty) is right-aligned."""
    from pooler._results import text_table
    numeric = [k == "num" for k in _column_kinds(rows)] or [False] * len(headers)
    return text_table([_plain(h) for h in headers], [[_plain(c) for c in r] for r in rows],
                      numeric=numeric).split("\n")


def to_text(blocks, width: int = 100) -> str:
    """The blocks as terminal text: headings underlined (``h3`` ends in a colon),
    paragraphs wrapped at ``width``, notes indented, tables aligned; figures are left out."""
    import textwrap
    out: list[str] = []
    blocks = list(blocks)
    for i, b in enumerate(blocks):
        if b.kind in ("h1", "h2"):
            t = _plain(b.text)
            out += ["", t, ("=" if b.kind == "h1" else "-") * min(len(t), width)]
        elif b.kind == "h3":
            out += ["", _plain(b.text) + ":"]
        elif b.kind == "p":
            out += (textwrap.wrap(_plain(b.text), width, break_on_hyphens=False) or [""]) + [""]
        elif b.kind == "note":
            out += textwrap.wrap(_plain(b.text), width, initial_indent="  note: ",
                                 subsequent_indent="        ", break_on_hyphens=False)
            if i + 1 == len(blocks) or blocks[i + 1].kind != "note":
                out.append("")
        elif b.kind == "list":
            for i in b.items:
                out += textwrap.wrap(_plain(i), width, initial_indent="  - ",
                                     subsequent_indent="    ", break_on_hyphens=False)
            out.append("")
        elif b.kind in ("table", "key"):
            out += _text_table(b.headers, b.rows) + [""]
        elif b.kind == "code":
            out += [b.text, ""]
    text = "\n".join(out)
    return re.sub(r"\n{3,}", "\n\n", text).strip("\n")


# ------------------------------------------------------------------ Markdown

def to_markdown(blocks, figure_ext: str = "png") -> str:
    """The blocks as Markdown; figures link ``<src>.<figure_ext>`` beside the file."""
    out = []
    for b in blocks:
        if b.kind in ("h1", "h2", "h3"):
            out.append("#" * int(b.kind[1]) + f" {b.text}\n")
        elif b.kind == "p":
            out.append(b.text + "\n")
        elif b.kind == "note":
            out.append(f"Note: {b.text}\n")
        elif b.kind == "list":
            out.append("\n".join(f"- {i}" for i in b.items) + "\n")
        elif b.kind in ("table", "key"):
            out.append("| " + " | ".join(b.headers) + " |")
            out.append("|" + "---|" * len(b.headers))
            out += ["| " + " | ".join(str(c) for c in r) + " |" for r in b.rows]
            out.append("")
        elif b.kind == "figure":
            out.append(f"![{b.text}]({b.src}.{figure_ext})\n")
            out.append(f"*{b.text}*\n")
        elif b.kind == "code":
            out.append("```\n" + b.text + "\n```\n")
    return "\n".join(out)


# ------------------------------------------------------------------ HTML

_CSS = """body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;max-width:58rem;
margin:2rem auto;padding:0 1rem;line-height:1.45;color:#1d1d1d}h1{font-size:1.6rem}
h2{font-size:1.2rem;border-bottom:1px solid #ddd;padding-bottom:.2rem;margin-top:2rem}
h3{font-size:1rem;margin:1.2rem 0 .3rem}p.note{font-size:.9rem;color:#444}
table{border-collapse:collapse;font-size:.85rem;margin:.6rem 0}td,th{padding:.2rem .5rem;
border-bottom:1px solid #eee;text-align:left}th{background:#f4f4f4}
.num{text-align:right;white-space:nowrap}.ci{white-space:nowrap}
figure{margin:1rem 0}figure img{max-width:100%}figcaption{font-size:.85rem;color:#555}
code,pre{background:#f6f6f6;padding:.1rem .3rem}pre{padding:.6rem;overflow-x:auto}
h1{margin:1rem 0 .6rem}section.decision{border-left:4px solid #2a6f97;background:#f3f8fb;
padding:.1rem 1rem .4rem;margin:0 0 1.5rem}section.decision h2{margin-top:.6rem;border:0}
section.decision p{margin:.5rem 0}"""


def _inline(text: str) -> str:
    """Markdown-safe block text to HTML: '<' and '>' of our own words escaped (user text
    is already entity-escaped by :func:`md_escape`), then the few Markdown marks our
    blocks use."""
    text = str(text).replace("<", "&lt;").replace(">", "&gt;")
    if not _MARKS.search(text.replace("&", "")):
        return text
    text = _BOLD.sub(r"<strong>\1</strong>", _CODE.sub(r"<code>\1</code>", text))
    return _ESCAPED.sub(r"\1", text)


def html_fragment(blocks, figures_png: dict[str, bytes] | None = None) -> str:
    """The blocks as HTML elements (no page around them); figures are embedded from
    ``figures_png`` and left out when it does not have them."""
    out = []
    for b in blocks:
        if b.kind in ("h1", "h2", "h3"):
            out.append(f"<{b.kind}>{_inline(b.text)}</{b.kind}>")
        elif b.kind == "p":
            out.append(f"<p>{_inline(b.text)}</p>")
        elif b.kind == "note":
            out.append(f'<p class="note">Note: {_inline(b.text)}</p>')
        elif b.kind == "list":
            out.append("<ul>" + "".join(f"<li>{_inline(i)}</li>" for i in b.items) + "</ul>")
        elif b.kind in ("table", "key"):
            kinds = [f' class="{k}"' if k else "" for k in _column_kinds(b.rows)]
            head = "".join(f"<th{k}>{_inline(h)}</th>"
                           for h, k in zip(b.headers, kinds or [""] * len(b.headers)))
            body = "".join("<tr>" + "".join(f"<td{k}>{_inline(c)}</td>"
                                            for c, k in zip(r, kinds)) + "</tr>"
                           for r in b.rows)
            out.append(f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>")
        elif b.kind == "figure" and figures_png and b.src in figures_png:
            data = base64.b64encode(figures_png[b.src]).decode("ascii")
            out.append(f'<figure><img alt="{html.escape(b.text)}" '
                       f'src="data:image/png;base64,{data}"><figcaption>'
                       f"{html.escape(b.text)}</figcaption></figure>")
        elif b.kind == "code":
            out.append(f"<pre><code>{html.escape(b.text)}</code></pre>")
        elif b.kind == "begin":
            out.append(f'<section id="{html.escape(b.text)}" class="{html.escape(b.text)}">')
        elif b.kind == "end":
            out.append("</section>")
    return "\n".join(out)


def to_html(blocks, figures_png: dict[str, bytes], title: str) -> str:
    """The blocks as one self-contained HTML page (figures embedded as PNG data)."""
    return "\n".join(["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
                      f"<title>{html.escape(title)}</title>",
                      f"<style>{_CSS}</style></head><body>",
                      html_fragment(blocks, figures_png), "</body></html>"])
