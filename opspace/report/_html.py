"""A small, dependency-free builder for self-contained HTML pages: escaped
text, tables, figures embedded as base64 PNG, a verdict banner, and one
stylesheet.  Used by the sizing, sweep and simulation pages.

The palette is opspace's own, blue for pass and burnt orange for fail (told
apart with red-green colour blindness; every coloured cell also says pass or
FAIL, or shows a signed margin, in words); banners carry a bar on the left.
Margin cells of the candidate matrix shade by margin: bad (< 0), m1 (0–10 %),
m2 (10–30 %), m3 (> 30 %)."""

from __future__ import annotations

import base64
import html
import math

__all__ = ["Page", "fmt"]

STYLE = """
body { font-family: system-ui, -apple-system, "Segoe UI", sans-serif; margin: 2em auto;
       max-width: 1100px; color: #222; line-height: 1.4; padding: 0 1em; }
h1 { font-size: 1.6em; margin-bottom: 0.2em; } h2 { border-bottom: 1px solid #ccc;
     padding-bottom: 0.2em; margin-top: 2em; } h3 { margin-bottom: 0.3em; }
.meta { color: #555; font-size: 0.9em; }
.verdict { padding: 0.7em 1em 0.7em 1.1em; font-size: 1.1em; margin: 1em 0;
           border-left: 7px solid; background: #f3f4f6; }
.verdict.pass { background: #e4eff6; border-color: #1d5f86; }
.verdict.fail { background: #fbe8d9; border-color: #a4460f; }
.verdict.info { background: #eeeff2; border-color: #59606b; }
.caution { background: #f8f1de; border-left: 7px solid #8c6a12; padding: 0.6em 1em;
           font-size: 0.92em; }
.tablewrap { max-width: 100%; overflow-x: auto; margin: 0.6em 0 1.2em; }
table { border-collapse: collapse; font-size: 0.88em; }
th, td { border: 1px solid #ddd; padding: 0.25em 0.55em; text-align: right; }
th { background: #f5f5f5; } td.l, th.l { text-align: left; }
td.ok { background: #e4eff6; } td.bad { background: #fbe8d9; font-weight: 600; }
td.m1 { background: #eef5f9; } td.m2 { background: #cfe2ee; } td.m3 { background: #a9cbe0; }
td.rec { outline: 2px solid #1d5f86; outline-offset: -2px; font-weight: 600; }
td.na { color: #999; }
figure { margin: 1em 0; } figure img { max-width: 100%; border: 1px solid #eee; }
figcaption { font-size: 0.88em; color: #444; }
ul.small { font-size: 0.9em; }
"""


def fmt(value, digits=3):
    """A number for a table: finite -> `digits` significant figures, else a word."""
    if value is None:
        return "–"
    if isinstance(value, (bool, str)):
        return str(value)
    value = float(value)
    if math.isnan(value):
        return "n/a"
    if math.isinf(value):
        return "∞" if value > 0 else "−∞"
    return f"{value:.{digits}g}"


class Page:
    """Accumulates HTML parts; `render()` returns the whole document."""

    def __init__(self, title):
        self.title = title
        self.parts = []

    def raw(self, text):
        self.parts.append(text)

    def heading(self, text, level=2, anchor=None):
        ident = f' id="{html.escape(anchor)}"' if anchor else ""
        self.parts.append(f"<h{level}{ident}>{html.escape(text)}</h{level}>")

    def para(self, text, cls=None):
        c = f' class="{cls}"' if cls else ""
        self.parts.append(f"<p{c}>{html.escape(text)}</p>")

    def items(self, texts, cls="small"):
        lis = "".join(f"<li>{html.escape(t)}</li>" for t in texts)
        self.parts.append(f'<ul class="{cls}">{lis}</ul>')

    def verdict(self, status, message, cls=None):
        """A banner: STATUS — message; cls "pass", "fail" or "info" (default: by status)."""
        cls = cls or {"pass": "pass", "fail": "fail"}.get(status, "info")
        self.parts.append(f'<div class="verdict {cls}"><b>{html.escape(status.upper())}</b> — '
                          f"{html.escape(message)}</div>")

    def caution(self, texts):
        body = "<br>".join(html.escape(t) for t in texts)
        self.parts.append(f'<div class="caution"><b>Caution.</b> {body}</div>')

    def table(self, header, rows, *, left=(0,), classes=None):
        """rows: lists of cells (already formatted strings); classes: same shape
        of CSS classes ('ok', 'bad', 'na' or '') or None."""
        th = "".join(f'<th class="{"l" if i in left else ""}">{html.escape(h)}</th>'
                     for i, h in enumerate(header))
        body = []
        for r, row in enumerate(rows):
            cells = []
            for i, cell in enumerate(row):
                cls = ["l"] if i in left else []
                if classes is not None and classes[r][i]:
                    cls.append(classes[r][i])
                c = f' class="{" ".join(cls)}"' if cls else ""
                cells.append(f"<td{c}>{html.escape(str(cell))}</td>")
            body.append("<tr>" + "".join(cells) + "</tr>")
        self.parts.append(f'<div class="tablewrap"><table><thead><tr>{th}</tr></thead>'
                          f"<tbody>{''.join(body)}</tbody></table></div>")

    def figure(self, image, caption, mime="image/png"):
        """An embedded image (bytes; PNG, or mime="image/gif" for an animation)."""
        data = base64.b64encode(image).decode("ascii")
        self.parts.append(f'<figure><img alt="{html.escape(caption)}" '
                          f'src="data:{mime};base64,{data}"><figcaption>'
                          f"{html.escape(caption)}</figcaption></figure>")

    def render(self):
        return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
                f"<title>{html.escape(self.title)}</title><style>{STYLE}</style></head>"
                f"<body>{''.join(self.parts)}</body></html>\n")
