"""HTML building blocks for report.html: escaping, tables, the page shell.

Every string that comes from data (animal ids, file names, notes, column
names and values, the command line) goes through :func:`esc`.  The page loads
nothing from the network: the style sheet is inline, and a Content Security
Policy forbids remote resources and every script except the one fixed search
script (:data:`SEARCH_JS`, allowed by its SHA-256 hash), so even a string
that escaped escaping could not run.
"""

from __future__ import annotations

import base64
import hashlib
import html
import math
from datetime import date, datetime

import numpy as np
import pandas as pd

from roamstat.shown import shown

ID_SHOWN_CHARS = 120  # longer ids are shortened in headings and tables, shown in full on demand

CSP = "default-src 'none'; img-src 'self' data:; style-src 'unsafe-inline'"

#: Filters the overview's animal blocks by the search box (plain JS, no external assets).
SEARCH_JS = ("(function(){var box=document.getElementById('animal-search');if(!box)return;"
             "var blocks=document.querySelectorAll('#overview-table tbody'),count=document.getElementById('animal-count');"
             "box.addEventListener('input',function(){var q=box.value.trim().toLowerCase(),n=0;"
             "for(var i=0;i<blocks.length;i++){var b=blocks[i],hit=!q||b.getAttribute('data-search').indexOf(q)>=0"
             "||b.textContent.toLowerCase().indexOf(q)>=0;b.hidden=!hit;if(hit)n++;}"
             "count.textContent=n+' of '+blocks.length+' animals';});})();")

CSS = """
*{box-sizing:border-box}
body{margin:0;font-family:system-ui,-apple-system,"Segoe UI",Roboto,"Helvetica Neue",Arial,sans-serif;
 line-height:1.45;color:#1b1f24;background:#fff;font-size:16px}
main{max-width:1240px;margin:0 auto;padding:1rem}
h1{font-size:1.6rem;margin:.4rem 0}
h2{font-size:1.3rem;border-bottom:2px solid #dde3ea;padding-bottom:.2rem;margin-top:2.2rem}
h3{font-size:1.1rem;margin-top:1.8rem;overflow-wrap:anywhere}
p,li{max-width:75ch}
.scroll{overflow-x:auto;-webkit-overflow-scrolling:touch;margin:.4rem 0 1rem;max-width:100%}
table{border-collapse:collapse;font-size:.85rem}
th,td{border:1px solid #d0d7de;padding:.25rem .5rem;text-align:left;vertical-align:top;overflow-wrap:anywhere}
td.num{white-space:nowrap}th{overflow-wrap:normal}.nowrap{white-space:nowrap}
table.overview{width:100%}table.overview td{font-size:.84rem}
table.overview tbody{border-top:2px solid #aab4bf}
tr.says td{border-top:none;color:#2d333a;background:#fafbfc;font-size:.84rem}
.why{color:#6b4e00}.ratio{font-weight:600;margin-right:.3rem}
svg.interval{display:block;margin-top:.15rem}
.v{display:inline-block;border-radius:3px;padding:0 .3rem;margin:.05rem 0;white-space:nowrap}
dl.legend{display:grid;grid-template-columns:max-content 1fr;gap:.15rem 1rem;font-size:.85rem;max-width:110ch}
dl.legend dt{font-weight:600}dl.legend dd{margin:0}
p.says{font-size:1.02rem;font-weight:500}
.search input{font-size:1rem;padding:.2rem .4rem;width:18rem;max-width:100%}
th{background:#f3f6f9;font-weight:600}
td.num{text-align:right;font-variant-numeric:tabular-nums}
td.text{white-space:normal;min-width:12ch;max-width:48ch;overflow-wrap:anywhere}
.figures{display:grid;grid-template-columns:repeat(auto-fill,minmax(min(100%,440px),1fr));gap:1rem;margin:1rem 0}
figure{margin:0}
img{width:100%;height:auto;display:block;border:1px solid #eceff3}
figcaption{font-size:.82rem;color:#4d5661;margin-top:.2rem}
ul.key{list-style:none;display:flex;flex-wrap:wrap;gap:.1rem .9rem;padding:0;margin:.3rem 0 0;font-size:.8rem}
ul.key li{display:flex;align-items:center;gap:.3rem;max-width:none}ul.key svg{flex:none}
.note{background:#fff8e1;border-left:4px solid #e0a800;padding:.5rem .8rem;margin:.6rem 0}
.caution{background:#fdecea;border-left:4px solid #c62828;padding:.5rem .8rem;margin:.6rem 0}
.meta{font-size:.9rem;color:#3d4650}
code{font-size:.85em;overflow-wrap:anywhere}
.v-farther{background:#fde2e1}.v-closer{background:#dff3e4}.v-consistent{background:#f1f3f5}
.v-insufficient{background:#fff4d6}.v-–{background:#f1f3f5}
nav ul{columns:16rem;padding-left:1.2rem}
details{margin:.4rem 0}
@media (max-width:600px){main{padding:.6rem}h1{font-size:1.35rem}table{font-size:.8rem}}
@media print{
 body{font-size:10.5pt}main{max-width:none;padding:0}
 nav{display:none}.scroll{overflow:visible}
 th,td{white-space:normal}
 figure,tr,.note,.caution{break-inside:avoid}
 section.animal{break-before:page}
 .figures{grid-template-columns:1fr 1fr}
 a{color:inherit;text-decoration:none}
}
"""

_VERDICT_CLASS = {"farther": "v-farther", "closer": "v-closer", "consistent": "v-consistent",
                  "insufficient": "v-insufficient"}


def esc(value) -> str:
    """HTML-escape any value's text (quotes included, safe inside attributes), control and bidi characters shown as escapes."""
    return html.escape(shown(value), quote=True)


def is_missing(value) -> bool:
    if value is None or value is pd.NA or value is pd.NaT:
        return True
    return isinstance(value, float) and math.isnan(value)


def fmt(value) -> str:
    """Display text of one cell (not yet escaped): 4 significant digits, ISO times."""
    if is_missing(value):
        return "–"
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        value = float(value)
        if not math.isfinite(value):
            return str(value)
        # Whole numbers for big values (12000.5 m reads better than 1.2e+04), 4 significant digits otherwise.
        return f"{value:.0f}" if 1e4 <= abs(value) < 1e15 else f"{value:.4g}"
    if isinstance(value, (pd.Timestamp, datetime, date)):
        return value.isoformat()
    return str(value)


def short_id(animal_id: str) -> str:
    """An id shortened for display (not escaped)."""
    animal_id = str(animal_id)
    if len(animal_id) <= ID_SHOWN_CHARS:
        return animal_id
    return f"{animal_id[:ID_SHOWN_CHARS]}… ({len(animal_id)} characters)"


def cell(value, column: str = "") -> str:
    text = fmt(value)
    if isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, (bool, np.bool_)):
        return f'<td class="num">{esc(text)}</td>'
    classes = ["text"] if len(text) > 24 else []
    if column.endswith("verdict") and text in _VERDICT_CLASS:
        classes.append(_VERDICT_CLASS[text])
    attr = f' class="{" ".join(classes)}"' if classes else ""
    return f"<td{attr}>{esc(text)}</td>"


def table(frame: pd.DataFrame, links: dict | None = None, link_column: str = "animal_id", numeric=()) -> str:
    """A scrollable HTML table of ``frame``; ``links`` maps values of ``link_column`` to anchors.

    ``numeric`` names columns of display text that are numbers (right-aligned, not wrapped).
    """
    if frame is None or frame.empty:
        return '<p class="meta">(no rows)</p>'
    head = "".join(f'<th scope="col">{esc(c)}</th>' for c in frame.columns)
    body = []
    for row in frame.itertuples(index=False, name=None):
        cells = []
        for column, value in zip(frame.columns, row):
            if links and column == link_column and str(value) in links:
                cells.append(f'<td class="text"><a href="#{esc(links[str(value)])}">{esc(short_id(value))}</a></td>')
            elif column in numeric:
                cells.append(f'<td class="num">{esc(value)}</td>')
            else:
                cells.append(cell(value, str(column)))
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f'<div class="scroll"><table><thead><tr>{head}</tr></thead><tbody>{"".join(body)}</tbody></table></div>'


def key_values(pairs) -> str:
    """A two-column table of (name, value) pairs."""
    rows = "".join(f'<tr><th scope="row">{esc(k)}</th>{cell(v)}</tr>' for k, v in pairs)
    return f'<div class="scroll"><table><tbody>{rows}</tbody></table></div>'


def figure(src: str, caption: str, key=()) -> str:
    """An image with its key (:class:`roamstat.report.key.KeyEntry`, drawn in the page) and caption.

    The alt text is the caption and the key in words.
    """
    from roamstat.report.key import key_html, key_text

    alt = " ".join(t for t in (caption, key_text(key)) if t)
    return (f'<figure><img src="{esc(src)}" alt="{esc(alt)}">{key_html(key)}'
            f"<figcaption>{esc(caption)}</figcaption></figure>")


def search_script() -> str:
    """The fixed search script (the only script a page may run)."""
    return SEARCH_JS


def page(title: str, body: str, script: str = "") -> str:
    """The whole document around ``body`` (already HTML); ``script`` is allowed by its hash only."""
    csp = CSP
    if script:
        digest = base64.b64encode(hashlib.sha256(script.encode("utf-8")).digest()).decode("ascii")
        csp += f"; script-src 'sha256-{digest}'"
    return (
        "<!DOCTYPE html>\n"
        '<html lang="en"><head><meta charset="utf-8">'
        f'<meta http-equiv="Content-Security-Policy" content="{csp}">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        f"<title>{esc(title)}</title><style>{CSS}</style></head>"
        f"<body><main>{body}</main>" + (f"<script>{script}</script>" if script else "") + "</body></html>\n"
    )
