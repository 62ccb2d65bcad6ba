"""Self-contained HTML reports: text, tables and PNG figures embedded in one file.

Sits at the edge of the package with the plots: nothing in the physics
imports it. The page uses no scripts and no external resources, so it opens
the same on an air-gapped lab computer and can be archived with the data.
It is laid out for a screen 1280 px wide: a table wider than the page
scrolls inside its own box (the page itself never scrolls sideways), cells
wrap long text, and long inputs (the scenario file) sit folded at the end.
"""

import base64
import datetime
import html
from pathlib import Path

from simulator.io.files import atomic_write_text

_STYLE = """
body { font-family: sans-serif; max-width: 70em; margin: 2em auto; padding: 0 1em;
       color: #222; line-height: 1.45; }
h1 { font-size: 1.5em; border-bottom: 2px solid #444; }
h2 { font-size: 1.2em; margin-top: 2em; border-bottom: 1px solid #bbb; }
.table { max-width: 100%; overflow-x: auto; margin: 0.5em 0; }
table { border-collapse: collapse; }
th, td { border: 1px solid #ccc; padding: 0.25em 0.6em; text-align: right;
         overflow-wrap: anywhere; }
th { max-width: 12em; } td { max-width: 40em; } td.text, th.text { text-align: left; }
th { background: #f0f0f0; } td:first-child, th:first-child { text-align: left; }
pre { background: #f7f7f7; padding: 0.8em; overflow-x: auto; font-size: 0.85em; }
.warn { background: #fff4e0; border-left: 4px solid #d08000; padding: 0.4em 0.8em; }
img { max-width: 100%; height: auto; border: 1px solid #ddd; margin: 0.5em 0; }
figure { margin: 1em 0; } figcaption { color: #444; font-size: 0.9em; }
details summary { cursor: pointer; color: #333; }
p { overflow-wrap: anywhere; }
.meta { color: #666; font-size: 0.85em; }
"""


def escape(text):
    """HTML-escape ``text``."""
    return html.escape(str(text))


def png_tag(path, alt):
    """An <img> element carrying the PNG at ``path`` inline (base64)."""
    data = base64.b64encode(Path(path).read_bytes()).decode("ascii")
    return f'<img alt="{escape(alt)}" src="data:image/png;base64,{data}">'


def table(rows, header=None):
    """An HTML table from rows of cells; floats printed with 6 significant digits."""

    def words(value):
        return isinstance(value, str) and value != "—"

    def cell(value, tag):
        if isinstance(value, float):
            return f"<{tag}>{value:.6g}</{tag}>"
        if words(value) and tag == "td":  # words read from the left
            return f'<td class="text">{escape(value)}</td>'
        return f"<{tag}>{escape(value)}</{tag}>"

    parts = ['<div class="table"><table>']
    if header:  # the heading of a column of words sits on the left too
        text = [bool(rows) and all(words(r[i]) for r in rows) for i in range(len(header))]
        parts.append("<tr>" + "".join(
            f'<th class="text">{escape(h)}</th>' if t else cell(h, "th")
            for h, t in zip(header, text, strict=True)) + "</tr>")
    parts += ["<tr>" + "".join(cell(c, "td") for c in row) + "</tr>" for row in rows]
    parts.append("</table></div>")
    return "\n".join(parts)


def preformatted(text):
    """A <pre> block."""
    return f"<pre>{escape(text)}</pre>"


def folded(summary, content):
    """``content`` (trusted HTML) folded under a one-line ``summary`` (<details>)."""
    return f"<details><summary>{escape(summary)}</summary>\n{content}\n</details>"


def figure(path, caption):
    """A PNG (inline) with its caption underneath."""
    return f"<figure>{png_tag(path, caption)}<figcaption>{escape(caption)}</figcaption></figure>"


def warnings_block(warnings):
    """Warnings highlighted, or a line saying there are none."""
    if not warnings:
        return "<p>No regime warnings.</p>"
    return "\n".join(f'<p class="warn">{escape(w)}</p>' for w in warnings)


def write_report(path, title, sections, *, meta=""):
    """Write a report page atomically.

    Parameters
    ----------
    path : path
    title : str
    sections : sequence of (heading, html)
        Section bodies are trusted HTML built with the helpers above.
    meta : str
        One line of provenance under the title.
    """
    stamp = datetime.datetime.now(datetime.UTC).strftime("%Y-%m-%d %H:%M UTC")
    body = [f"<h1>{escape(title)}</h1>",
            f'<p class="meta">{escape(meta)} · written {stamp}</p>']
    for heading, content in sections:
        body += [f"<h2>{escape(heading)}</h2>", content]
    page = ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<title>{escape(title)}</title><style>{_STYLE}</style></head><body>\n"
            + "\n".join(body) + "\n</body></html>\n")
    atomic_write_text(path, page)
    return Path(path)
