"""Pieces of the report page: its style sheet, escaping, numbers, tables, preformatted text and sections.

Every text that reaches the page goes through :func:`esc` (or a function here that calls it), so that a
config's ``<`` or ``&`` is shown, never read as markup.
"""
from __future__ import annotations

import math
from html import escape
from typing import Any, Sequence

from ampmodel.output.summary import is_number

NUM = ' class="num"'

CSS = """
*{box-sizing:border-box}
body{margin:0;font-family:system-ui,-apple-system,"Segoe UI",Roboto,Helvetica,Arial,sans-serif;
 font-size:15px;line-height:1.45;color:#1a1a1a;background:#fff}
main{max-width:62rem;margin:0 auto;padding:1rem 1.25rem 3rem}
h1{font-size:1.6rem;margin:.5rem 0 .25rem}
h2{font-size:1.2rem;margin:2rem 0 .5rem;border-bottom:1px solid #ccc;padding-bottom:.2rem}
h3{font-size:1.05rem;margin:1.2rem 0 .4rem}
p.meta,p.stamp{color:#555;margin:.2rem 0}
.safety{border:3px solid #b00020;background:#fff3f3;padding:.7rem 1rem;margin:1rem 0;font-weight:600}
.safety strong{color:#b00020;text-transform:uppercase;letter-spacing:.04em}
pre{white-space:pre-wrap;overflow-wrap:anywhere;word-break:break-word;background:#f6f6f6;
 border:1px solid #ddd;padding:.6rem .8rem;font-size:13px;line-height:1.35}
table{border-collapse:collapse;margin:.4rem 0;font-size:14px}
th,td{border:1px solid #ccc;padding:.25rem .5rem;text-align:left;vertical-align:top}
td.num{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
th{background:#eee}
.wide{overflow-x:auto;max-width:100%}
figure{margin:1rem 0;break-inside:avoid;page-break-inside:avoid}
img{max-width:100%;height:auto;display:block;border:1px solid #ddd}
figcaption{font-size:13px;color:#333;margin-top:.2rem}
figcaption code{color:#555}
.sev{display:inline-block;padding:0 .4rem;border-radius:3px;font-size:12px;font-weight:700;white-space:nowrap}
tr.warning td{background:#fff4e5}
tr.warning .sev{background:#d35400;color:#fff}
tr.note .sev{background:#dfe6ee;color:#1a1a1a}
tr.muted td{color:#777}
.failed{color:#b00020;font-weight:600}
.none{color:#555;font-style:italic}
@media print{
 body{font-size:11pt}
 main{max-width:none;padding:0}
 .wide{overflow:visible}
 table,figure,pre,.safety{break-inside:avoid;page-break-inside:avoid}
 h2,h3{break-after:avoid;page-break-after:avoid}
 img{max-width:100%;height:auto}
}
"""


def esc(value: Any) -> str:
    """``value`` as text, HTML-escaped (quotes too)."""
    return escape(str(value), quote=True)


def fmt_num(value: Any, digits: int = 5) -> str:
    """A number with ``digits`` significant digits (an integer whole; None and NaN as "-"), other values as text."""
    if value is None:
        return "-"
    if isinstance(value, bool) or not is_number(value):
        return str(value)
    v = float(value)
    if math.isnan(v):
        return "-"
    if float(value).is_integer() and abs(v) < 1e15 and not isinstance(value, float):
        return str(int(value))
    return f"{v:.{digits}g}"


def fmt_pct(value: float | None) -> str:
    """A fraction in per cent, one decimal ("-" for None)."""
    return "-" if value is None else f"{100 * value:.1f} %"


def html_table(header: Sequence[str], rows: Sequence[Sequence[str]], numeric: Sequence[bool] | None = None,
               row_classes: Sequence[str] | None = None, raw: bool = False) -> str:
    """An HTML table in a box that scrolls sideways on screen; cells escaped unless ``raw``."""
    numeric = numeric or [False] * len(header)
    out = ['<div class="wide"><table>', "<thead><tr>" + "".join(f"<th>{esc(h)}</th>" for h in header) + "</tr></thead>",
           "<tbody>"]
    for i, row in enumerate(rows):
        cls = f' class="{esc(row_classes[i])}"' if row_classes and row_classes[i] else ""
        cells = "".join(f"<td{NUM if numeric[j] else ''}>{c if raw else esc(c)}</td>" for j, c in enumerate(row))
        out.append(f"<tr{cls}>{cells}</tr>")
    out.append("</tbody></table></div>")
    return "\n".join(out)


def pre_block(lines: Sequence[str] | str) -> str:
    """Lines of text, escaped, in a <pre> that wraps long lines."""
    text = lines if isinstance(lines, str) else "\n".join(lines)
    return f"<pre>{esc(text)}</pre>"


def section(title: str, body: str, anchor: str) -> str:
    """A <section> with its heading; ``body`` is HTML already."""
    return f'<section id="{esc(anchor)}">\n<h2>{esc(title)}</h2>\n{body}\n</section>'

