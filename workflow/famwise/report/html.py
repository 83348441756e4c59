"""HTML building blocks of the report: escaping, tables, figures, markdown, the page."""

import base64
import html
import re

from famwise.report.methods import fmt

CSS = """
:root { --ink:#1d1d1f; --soft:#5b5f66; --rule:#d9dbe0; --band:#f4f2ec; --warn:#8a3b12;
        --warnbg:#fbefe4; --note:#21406b; --notebg:#eaf0f8; }
* { box-sizing: border-box; }
body { font: 15px/1.5 "DejaVu Sans", "Helvetica Neue", Arial, sans-serif; color: var(--ink);
       margin: 0; background: #fff; }
header { padding: 28px 40px 18px; border-bottom: 3px solid var(--ink); }
header h1 { margin: 0 0 4px; font-size: 26px; letter-spacing: .01em; }
header p { margin: 0; color: var(--soft); font-size: 13px; }
nav { padding: 10px 40px; background: var(--band); font-size: 13px; border-bottom: 1px solid var(--rule); }
nav a { margin-right: 16px; color: var(--ink); }
main { padding: 8px 32px 40px; max-width: 1240px; }
h2 { font-size: 21px; border-bottom: 1px solid var(--rule); padding-bottom: 4px; margin-top: 34px; }
h3 { font-size: 17px; margin-top: 26px; }
h4 { font-size: 15px; margin: 18px 0 6px; }
table { border-collapse: collapse; font-size: 12.5px; margin: 8px 0 14px; }
th, td { border-bottom: 1px solid var(--rule); padding: 3px 9px; text-align: left; vertical-align: top; }
th { background: var(--band); font-weight: 600; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
td.wrap { max-width: 260px; word-break: break-word; }
tr.significant td { font-weight: 600; }
tr.excluded td { color: var(--soft); }
.grid { display: flex; flex-wrap: wrap; gap: 14px; align-items: flex-start; }
figure { margin: 6px 0 12px; break-inside: avoid; page-break-inside: avoid; }
figure img { max-width: 100%; height: auto; display: block; border: 1px solid var(--rule); }
.grid figure { width: 360px; }
.scroll { overflow-x: auto; max-width: 100%; }
figcaption { font-size: 12.5px; color: var(--soft); margin-top: 4px; }
figcaption b { color: var(--ink); }
.note, .warning { padding: 8px 12px; margin: 8px 0; font-size: 13.5px; border-left: 4px solid; }
.note { background: var(--notebg); border-color: var(--note); }
.warning { background: var(--warnbg); border-color: var(--warn); }
.summary { font-size: 14px; margin: 4px 0; }
pre { background: var(--band); padding: 10px; font-size: 12px; overflow-x: auto; white-space: pre-wrap; }
.methods { max-width: 900px; }
.methods li { margin-bottom: 4px; }
@media print {
  nav { display: none; }
  header, main { padding-left: 0; padding-right: 0; }
  body { font-size: 11pt; }
  h2 { break-before: page; page-break-before: always; }
  h2:first-of-type { break-before: auto; page-break-before: auto; }
  figure, table, .note, .warning { break-inside: avoid; page-break-inside: avoid; }
  .scroll { overflow: visible; }
  table { font-size: 8pt; }
  .grid figure { width: 31%; }
  details > pre { display: block; }
  a { color: inherit; text-decoration: none; }
}
"""


def esc(value) -> str:
    """HTML-escaped text of a value."""
    return html.escape(str(value), quote=True)


def anchor(*parts: str) -> str:
    """A stable HTML id from names."""
    return re.sub(r"[^A-Za-z0-9_-]+", "-", "--".join(parts)).strip("-") or "x"


def table(
    columns: list[str],
    rows: list[list],
    *,
    titles: dict | None = None,
    row_classes: list[str] | None = None,
    table_class: str = "",
) -> str:
    """An HTML table; numbers are right-aligned and printed with :func:`fmt`."""
    titles = titles or {}
    head = "".join(f'<th title="{esc(titles.get(c, ""))}">{esc(c)}</th>' for c in columns)
    body = []
    for index, row in enumerate(rows):
        cells = []
        for value in row:
            if isinstance(value, (int, float)) and not isinstance(value, bool):
                cells.append(f'<td class="num">{esc(fmt(value))}</td>')
            else:
                text = str(value)
                cells.append(f'<td class="wrap">{esc(text)}</td>' if len(text) > 40 else f"<td>{esc(text)}</td>")
        css = f' class="{row_classes[index]}"' if row_classes and row_classes[index] else ""
        body.append(f"<tr{css}>{''.join(cells)}</tr>")
    css = f' class="{table_class}"' if table_class else ""
    return f'<div class="scroll"><table{css}><thead><tr>{head}</tr></thead><tbody>{"".join(body)}</tbody></table></div>'


def figure(png: bytes, *, caption: str, alt: str, link: str | None = None) -> str:
    """A figure with the PNG embedded as base64; ``caption`` is HTML."""
    data = base64.b64encode(png).decode("ascii")
    extra = f' <a href="{esc(link)}">SVG</a>' if link else ""
    return (
        f'<figure><img alt="{esc(alt)}" src="data:image/png;base64,{data}">'
        f"<figcaption>{caption}{extra}</figcaption></figure>"
    )


def note(text: str, *, warning: bool = False) -> str:
    """A boxed note (HTML text); warnings stand out."""
    return f'<div class="{"warning" if warning else "note"}">{text}</div>'


def markdown(text: str) -> str:
    """The small markdown the methods paragraph uses (headings, paragraphs, lists) as HTML."""
    out, items, paragraph = [], [], []

    def flush():
        if paragraph:
            out.append(f"<p>{esc(' '.join(paragraph))}</p>")
            paragraph.clear()
        if items:
            out.append("<ul>" + "".join(f"<li>{esc(i)}</li>" for i in items) + "</ul>")
            items.clear()

    for line in text.splitlines():
        heading = re.match(r"^(#{1,4}) (.*)$", line)
        if heading:
            flush()
            level = min(len(heading.group(1)) + 1, 5)
            out.append(f"<h{level}>{esc(heading.group(2))}</h{level}>")
        elif line.startswith("- "):
            if paragraph:
                flush()
            items.append(line[2:])
        elif not line.strip():
            flush()
        else:
            paragraph.append(line.strip())
    flush()
    return "\n".join(out)


def page(*, title: str, subtitle: str, nav: list[tuple[str, str]], body: str) -> str:
    """The whole self-contained page."""
    links = "".join(f'<a href="#{esc(target)}">{esc(label)}</a>' for target, label in nav)
    return (
        '<!doctype html>\n<html lang="en"><head><meta charset="utf-8">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        '<link rel="icon" href="data:,">'
        f"<title>{esc(title)}</title><style>{CSS}</style></head><body>"
        f"<header><h1>{esc(title)}</h1><p>{esc(subtitle)}</p></header>"
        f"<nav>{links}</nav><main>{body}</main></body></html>\n"
    )
